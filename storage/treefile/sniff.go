package treefile

import (
	"bytes"
	"compress/gzip"
	"fmt"
	"io"
)

// sniffWindow is how much of the content Sniff needs at most.
const sniffWindow = 64 << 10

// Sniff tells the format from the first bytes of a model file (a few hundred
// bytes are enough; more is ignored beyond 64 KiB). Gzip content is
// decompressed as far as head allows. Leading whitespace and a UTF-8 byte
// order mark are skipped. Rules:
//   - '{' with a "learner" key: FormatXGBoostJSON;
//   - '[' then '{' or ']': FormatXGBoostDumpJSON;
//   - a first line starting "booster[": FormatXGBoostDumpText;
//   - a first line "tree" followed by "version=": FormatLightGBMText.
//
// XGBoost's binary JSON (UBJSON) and LightGBM's JSON dump are recognised and
// rejected with ErrUnsupported; anything else (including empty input) is
// ErrUnknownFormat.
func Sniff(head []byte) (Format, error) {
	if bytes.HasPrefix(head, gzipMagic) {
		zr, err := gzip.NewReader(bytes.NewReader(head))
		if err != nil {
			return "", fmt.Errorf("%w: gzip header: %w", ErrUnknownFormat, err)
		}
		plain, _ := io.ReadAll(io.LimitReader(zr, sniffWindow)) // a cut head ends early; what came out is enough
		head = plain
	}
	if len(head) > sniffWindow {
		head = head[:sniffWindow]
	}
	head = bytes.TrimPrefix(head, []byte("\xef\xbb\xbf"))
	s := bytes.TrimLeft(head, " \t\r\n")
	if len(s) == 0 {
		return "", fmt.Errorf("%w: empty content", ErrUnknownFormat)
	}
	switch s[0] {
	case '{':
		if len(s) > 1 && bytes.IndexByte([]byte("iUIlLSZTFNH$#"), s[1]) >= 0 {
			return "", fmt.Errorf("%w: XGBoost binary JSON (UBJSON) model; save it with a .json file name", ErrUnsupported)
		}
		if bytes.Contains(s, []byte(`"learner"`)) {
			return FormatXGBoostJSON, nil
		}
		if bytes.Contains(s, []byte(`"tree_info"`)) && bytes.Contains(s, []byte(`"tree_structure"`)) {
			return "", fmt.Errorf("%w: LightGBM JSON dump; use the text model (save_model)", ErrUnsupported)
		}
		return "", fmt.Errorf("%w: JSON object without a \"learner\" key", ErrUnknownFormat)
	case '[':
		rest := bytes.TrimLeft(s[1:], " \t\r\n")
		if len(rest) == 0 || rest[0] == '{' || rest[0] == ']' {
			return FormatXGBoostDumpJSON, nil
		}
		return "", fmt.Errorf("%w: JSON list that does not hold tree objects", ErrUnknownFormat)
	}
	line, after, _ := bytes.Cut(s, []byte("\n"))
	line = bytes.TrimRight(line, " \t\r")
	if bytes.HasPrefix(line, []byte("booster[")) {
		return FormatXGBoostDumpText, nil
	}
	if string(line) == "tree" && bytes.HasPrefix(bytes.TrimLeft(after, " \t\r\n"), []byte("version=")) {
		return FormatLightGBMText, nil
	}
	return "", fmt.Errorf("%w: content starts with %q", ErrUnknownFormat, preview(s))
}

// preview returns the start of s for an error message (at most 24 bytes).
func preview(s []byte) string {
	if len(s) > 24 {
		s = s[:24]
	}
	return string(s)
}
