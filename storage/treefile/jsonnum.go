package treefile

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strconv"
)

// XGBoost writes non-finite floats as the bare tokens NaN, Infinity and
// -Infinity (for example the split_conditions of categorical nodes), which
// strict JSON parsers reject. quoteNonFinite turns each such token outside a
// string into a JSON string ("NaN", "Infinity", "-Infinity"; also the
// lower-case nan/inf spellings) so encoding/json accepts the document; the
// array types below read those strings back as floats. Line breaks are kept,
// so line numbers computed on the result are those of the input. data is not
// modified; it is returned as is when there is nothing to quote.
func quoteNonFinite(data []byte) []byte {
	var out []byte
	last := 0
	inString := false
	for i := 0; i < len(data); i++ {
		c := data[i]
		if inString {
			switch c {
			case '\\':
				i++
			case '"':
				inString = false
			}
			continue
		}
		switch c {
		case '"':
			inString = true
			continue
		case 'N', 'I', 'n', 'i', '-':
		default:
			continue
		}
		tok := nonFiniteToken(data[i:])
		if tok == 0 {
			continue
		}
		if out == nil {
			out = make([]byte, 0, len(data)+64)
		}
		out = append(out, data[last:i]...)
		out = append(out, '"')
		out = append(out, data[i:i+tok]...)
		out = append(out, '"')
		i += tok - 1
		last = i + 1
	}
	if out == nil {
		return data
	}
	return append(out, data[last:]...)
}

// nonFiniteTokens are the spellings quoteNonFinite recognises, longest first
// where one is a prefix of another.
var nonFiniteTokens = []string{"-Infinity", "Infinity", "NaN", "-inf", "inf", "nan", "-nan"}

// nonFiniteToken returns the length of the non-finite token starting s, or 0.
// The token must end at a JSON delimiter so that names such as "null" or
// "infos" are left alone.
func nonFiniteToken(s []byte) int {
	for _, t := range nonFiniteTokens {
		if bytes.HasPrefix(s, []byte(t)) {
			if len(s) == len(t) || isJSONDelimiter(s[len(t)]) {
				return len(t)
			}
		}
	}
	return 0
}

// isJSONDelimiter reports whether c may follow a JSON value.
func isJSONDelimiter(c byte) bool {
	switch c {
	case ',', ']', '}', ' ', '\t', '\r', '\n':
		return true
	}
	return false
}

// parseJSONFloat reads one JSON number or quoted non-finite token.
func parseJSONFloat(tok []byte) (float64, error) {
	if len(tok) >= 2 && tok[0] == '"' && tok[len(tok)-1] == '"' {
		switch string(tok[1 : len(tok)-1]) {
		case "NaN", "nan", "-nan":
			return math.NaN(), nil
		case "Infinity", "inf":
			return math.Inf(1), nil
		case "-Infinity", "-inf":
			return math.Inf(-1), nil
		}
		return 0, fmt.Errorf("string %s where a number is expected", tok)
	}
	v, err := strconv.ParseFloat(string(tok), 64)
	if err != nil {
		var ne *strconv.NumError
		if errors.As(err, &ne) && errors.Is(ne.Err, strconv.ErrRange) {
			return v, nil // ±Inf or 0 on overflow/underflow; Validate judges it
		}
		return 0, fmt.Errorf("bad number %q", tok)
	}
	return v, nil
}

// splitJSONArray calls fn on each element token of a flat JSON array of
// scalars (already validated by encoding/json). Nested arrays or objects are
// an error.
func splitJSONArray(raw []byte, fn func(i int, tok []byte) error) error {
	raw = bytes.TrimSpace(raw)
	if bytes.Equal(raw, []byte("null")) {
		return nil
	}
	if len(raw) < 2 || raw[0] != '[' || raw[len(raw)-1] != ']' {
		return fmt.Errorf("expected an array, got %s", preview(raw))
	}
	body := bytes.TrimSpace(raw[1 : len(raw)-1])
	if len(body) == 0 {
		return nil
	}
	i := 0
	for len(body) > 0 {
		var tok []byte
		if body[0] == '"' {
			end := bytes.IndexByte(body[1:], '"')
			if end < 0 {
				return fmt.Errorf("unterminated string in array")
			}
			tok, body = body[:end+2], body[end+2:]
		} else {
			end := bytes.IndexByte(body, ',')
			if end < 0 {
				end = len(body)
			}
			tok, body = body[:end], body[end:]
		}
		tok = bytes.TrimSpace(tok)
		if len(tok) > 0 && (tok[0] == '[' || tok[0] == '{') {
			return fmt.Errorf("nested value in a flat array")
		}
		if err := fn(i, tok); err != nil {
			return fmt.Errorf("element %d: %w", i, err)
		}
		i++
		body = bytes.TrimSpace(body)
		if len(body) > 0 {
			if body[0] != ',' {
				return fmt.Errorf("expected ',' after element %d", i-1)
			}
			body = bytes.TrimSpace(body[1:])
		}
	}
	return nil
}

// jsonFloats is a JSON array of numbers that may hold quoted non-finite
// tokens (see quoteNonFinite). A JSON null leaves it nil.
type jsonFloats []float64

// UnmarshalJSON parses the array.
func (f *jsonFloats) UnmarshalJSON(raw []byte) error {
	out := make([]float64, 0, bytes.Count(raw, []byte(","))+1)
	err := splitJSONArray(raw, func(_ int, tok []byte) error {
		v, err := parseJSONFloat(tok)
		out = append(out, v)
		return err
	})
	if err != nil {
		return err
	}
	if bytes.Equal(bytes.TrimSpace(raw), []byte("null")) {
		*f = nil
		return nil
	}
	*f = out
	return nil
}

// jsonInts is a JSON array of integers; true and false read as 1 and 0
// (some writers store default_left as booleans). Values must fit in int64.
type jsonInts []int64

// UnmarshalJSON parses the array.
func (a *jsonInts) UnmarshalJSON(raw []byte) error {
	out := make([]int64, 0, bytes.Count(raw, []byte(","))+1)
	err := splitJSONArray(raw, func(_ int, tok []byte) error {
		switch string(tok) {
		case "true":
			out = append(out, 1)
			return nil
		case "false":
			out = append(out, 0)
			return nil
		}
		v, err := strconv.ParseInt(string(tok), 10, 64)
		if err != nil {
			// Integral floats such as 3.0 or 1E0 are accepted.
			fv, ferr := strconv.ParseFloat(string(tok), 64)
			if ferr != nil || fv != math.Trunc(fv) || math.Abs(fv) > 1<<53 {
				return fmt.Errorf("bad integer %q", tok)
			}
			v = int64(fv)
		}
		out = append(out, v)
		return nil
	})
	if err != nil {
		return err
	}
	if bytes.Equal(bytes.TrimSpace(raw), []byte("null")) {
		*a = nil
		return nil
	}
	*a = out
	return nil
}

// looseString reads a JSON string, number or boolean as its text. XGBoost
// stores parameters as strings ("5E-1"); hand-edited files sometimes hold
// numbers.
type looseString string

// UnmarshalJSON accepts a string, number, boolean or null.
func (s *looseString) UnmarshalJSON(raw []byte) error {
	raw = bytes.TrimSpace(raw)
	if len(raw) > 0 && raw[0] == '"' {
		var v string
		if err := json.Unmarshal(raw, &v); err != nil {
			return err
		}
		*s = looseString(v)
		return nil
	}
	if len(raw) > 0 && (raw[0] == '[' || raw[0] == '{') {
		return fmt.Errorf("expected a scalar, got %s", preview(raw))
	}
	if string(raw) == "null" {
		*s = ""
		return nil
	}
	*s = looseString(raw)
	return nil
}

// jsonErrorLine returns the 1-based line of a JSON decoding error's offset
// in data, or 0 when the error carries no offset.
func jsonErrorLine(data []byte, err error) int {
	var off int64 = -1
	var se *json.SyntaxError
	var te *json.UnmarshalTypeError
	switch {
	case errors.As(err, &se):
		off = se.Offset
	case errors.As(err, &te):
		off = te.Offset
	}
	if off < 0 {
		return 0
	}
	if off > int64(len(data)) {
		off = int64(len(data))
	}
	return bytes.Count(data[:off], []byte("\n")) + 1
}
