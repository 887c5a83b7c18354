package traffic

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"
)

// ErrRenameFile marks a malformed rename file.
var ErrRenameFile = errors.New("bad rename file")

// ReadRenameFile reads a CSV file of `model_name,column_name` lines mapping
// a model feature name to the traffic column that holds it, for
// Options.Rename. A first line that reads exactly `model_name,column_name`
// (any case, spaces trimmed) is a header and skipped. Fields are trimmed of
// spaces; blank lines are skipped. Every line must have two non-empty
// fields, and a model name may appear once. Errors name the file and line
// (1-based). An empty file gives an empty map.
func ReadRenameFile(path string) (map[string]string, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("traffic: rename file: %w", err)
	}
	defer fh.Close()
	m, err := parseRename(fh)
	if err != nil {
		return nil, fmt.Errorf("traffic: rename file %s: %w", path, err)
	}
	return m, nil
}

func parseRename(r io.Reader) (map[string]string, error) {
	cr := csv.NewReader(r)
	cr.FieldsPerRecord = -1
	cr.TrimLeadingSpace = true
	out := map[string]string{}
	lineOf := map[string]int{}
	for first := true; ; first = false {
		rec, err := cr.Read()
		if err == io.EOF {
			return out, nil
		}
		line, _ := cr.FieldPos(0)
		if err != nil {
			return nil, fmt.Errorf("%w: %w", ErrRenameFile, err)
		}
		for i := range rec {
			rec[i] = strings.TrimSpace(rec[i])
		}
		if first && len(rec) == 2 && strings.EqualFold(rec[0], "model_name") && strings.EqualFold(rec[1], "column_name") {
			continue
		}
		if len(rec) != 2 {
			return nil, fmt.Errorf("line %d: %w: %d fields, want 2 (model_name,column_name)", line, ErrRenameFile, len(rec))
		}
		if rec[0] == "" || rec[1] == "" {
			return nil, fmt.Errorf("line %d: %w: empty name in %q", line, ErrRenameFile, strings.Join(rec, ","))
		}
		if prev, dup := lineOf[rec[0]]; dup {
			return nil, fmt.Errorf("line %d: %w: model name %q already mapped on line %d", line, ErrRenameFile, rec[0], prev)
		}
		lineOf[rec[0]] = line
		out[rec[0]] = rec[1]
	}
}
