package treefile

import (
	"bytes"
	"errors"
	"fmt"
	"strconv"
	"strings"

	"splitledger/importance/forest"
)

// readXGBoostDumpText reads XGBoost's text dump (Booster.dump_model or
// "booster[i]:\n" + get_dump()[i] for each tree):
//
//	booster[0]:
//	0:[beta<1] yes=1,no=2,missing=1,gain=706.894104,cover=750
//		1:leaf=0.537777841,cover=32.75
//		2:[theta:{1,2,3,5}] yes=4,no=3,missing=3,gain=45.5,cover=99
//
// Statistics (gain, cover) are optional but must be on every node of a tree
// or on none. Indicator splits ("[f3]" without a threshold) are
// ErrUnsupported: the dump does not say which value goes which way. Errors
// carry the line number. See buildDumpEnsemble for the split semantics and
// Options for the objective, base score and class count a dump does not
// record.
func readXGBoostDumpText(data []byte, name string, opts Options) (*forest.Ensemble, error) {
	var trees []dumpTree
	lineNo := 0
	for len(data) > 0 {
		var line []byte
		line, data, _ = bytes.Cut(data, []byte("\n"))
		lineNo++
		s := strings.TrimSpace(string(line))
		if lineNo == 1 {
			s = strings.TrimPrefix(s, "\ufeff")
		}
		if s == "" {
			continue
		}
		if strings.HasPrefix(s, "booster[") {
			num, ok := strings.CutSuffix(s[len("booster["):], "]:")
			k, err := strconv.Atoi(num)
			if !ok || err != nil {
				return nil, fileErr(name, lineNo, fmt.Errorf("bad tree header %q", s))
			}
			if k != len(trees) {
				return nil, fileErr(name, lineNo, fmt.Errorf("tree header booster[%d] where booster[%d] was expected", k, len(trees)))
			}
			trees = append(trees, dumpTree{line: lineNo})
			continue
		}
		if len(trees) == 0 {
			return nil, fileErr(name, lineNo, fmt.Errorf("node line before the first booster[0]: header"))
		}
		n, err := parseDumpTextNode(s)
		if err != nil {
			return nil, fileErr(name, lineNo, err)
		}
		n.line = lineNo
		t := &trees[len(trees)-1]
		t.nodes = append(t.nodes, n)
	}
	if len(trees) == 0 {
		return nil, fileErr(name, 0, errors.New("no booster[N]: blocks"))
	}
	return buildDumpEnsemble(trees, FormatXGBoostDumpText, name, opts, true)
}

// parseDumpTextNode parses one trimmed node line.
func parseDumpTextNode(s string) (dumpNode, error) {
	var n dumpNode
	idText, rest, ok := strings.Cut(s, ":")
	if !ok {
		return n, fmt.Errorf("node line without \"id:\": %q", clip(s))
	}
	id, err := strconv.ParseInt(idText, 10, 64)
	if err != nil || id < 0 {
		return n, fmt.Errorf("bad node id %q", clip(idText))
	}
	n.id = id
	if strings.HasPrefix(rest, "leaf=") {
		n.leaf = true
		fields := strings.Split(rest, ",")
		if n.value, err = parseDumpFloat(fields[0][len("leaf="):]); err != nil {
			return n, fmt.Errorf("node %d: leaf value: %w", id, err)
		}
		for _, f := range fields[1:] {
			k, v, _ := strings.Cut(f, "=")
			if k == "cover" {
				if n.cover, err = parseDumpFloat(v); err != nil {
					return n, fmt.Errorf("node %d: cover: %w", id, err)
				}
				n.hasCover = true
			}
		}
		return n, nil
	}
	if !strings.HasPrefix(rest, "[") {
		return n, fmt.Errorf("node %d: expected \"[condition]\" or \"leaf=\", got %q", id, clip(rest))
	}
	end := strings.LastIndexByte(rest, ']')
	if end < 0 {
		return n, fmt.Errorf("node %d: unterminated condition %q", id, clip(rest))
	}
	cond, attrs := rest[1:end], strings.TrimSpace(rest[end+1:])
	if err := parseDumpCondition(&n, cond); err != nil {
		return n, fmt.Errorf("node %d: %w", id, err)
	}
	var haveYes, haveNo, haveMissing bool
	for _, f := range strings.Split(attrs, ",") {
		k, v, ok := strings.Cut(strings.TrimSpace(f), "=")
		if !ok {
			return n, fmt.Errorf("node %d: bad attribute %q", id, clip(f))
		}
		switch k {
		case "yes", "no", "missing":
			c, err := strconv.ParseInt(v, 10, 64)
			if err != nil {
				return n, fmt.Errorf("node %d: bad %s=%q", id, k, clip(v))
			}
			switch k {
			case "yes":
				n.yes, haveYes = c, true
			case "no":
				n.no, haveNo = c, true
			default:
				n.mis, haveMissing = c, true
			}
		case "gain":
			if n.gain, err = parseDumpFloat(v); err != nil {
				return n, fmt.Errorf("node %d: gain: %w", id, err)
			}
			n.hasGain = true
		case "cover":
			if n.cover, err = parseDumpFloat(v); err != nil {
				return n, fmt.Errorf("node %d: cover: %w", id, err)
			}
			n.hasCover = true
		}
	}
	if !haveYes || !haveNo || !haveMissing {
		return n, fmt.Errorf("node %d: split needs yes=, no= and missing=", id)
	}
	return n, nil
}

// parseDumpCondition reads "name<threshold" or "name:{c1,c2,...}".
func parseDumpCondition(n *dumpNode, cond string) error {
	if i := strings.LastIndex(cond, ":{"); i >= 0 && strings.HasSuffix(cond, "}") {
		n.feature = cond[:i]
		body := cond[i+2 : len(cond)-1]
		n.cats = []int64{}
		if body != "" {
			for _, c := range strings.Split(body, ",") {
				v, err := strconv.ParseInt(strings.TrimSpace(c), 10, 64)
				if err != nil {
					return fmt.Errorf("bad category %q", clip(c))
				}
				n.cats = append(n.cats, v)
			}
		}
	} else if i := strings.LastIndexByte(cond, '<'); i >= 0 {
		n.feature = cond[:i]
		v, err := parseDumpFloat(cond[i+1:])
		if err != nil {
			return fmt.Errorf("threshold: %w", err)
		}
		n.threshold = v
	} else {
		return fmt.Errorf("%w: indicator split [%s] has no threshold", ErrUnsupported, clip(cond))
	}
	if n.feature == "" {
		return fmt.Errorf("empty feature name in [%s]", clip(cond))
	}
	return nil
}

// parseDumpFloat parses a number as XGBoost prints it (including nan, inf).
func parseDumpFloat(s string) (float64, error) {
	v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
	if err != nil {
		var ne *strconv.NumError
		if errors.As(err, &ne) && errors.Is(ne.Err, strconv.ErrRange) {
			return v, nil
		}
		return 0, fmt.Errorf("bad number %q", clip(s))
	}
	return v, nil
}

// clip shortens s for an error message.
func clip(s string) string {
	if len(s) > 40 {
		return s[:40] + "..."
	}
	return s
}
