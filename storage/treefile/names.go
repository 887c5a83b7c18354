package treefile

import (
	"bytes"
	"fmt"
	"os"
	"strings"
)

// ReadNames reads a feature-name file: one name per line, in model order
// (line i names feature i-1). Surrounding spaces, a trailing "\r" and a
// UTF-8 byte order mark are removed. Blank lines at the end are allowed;
// a blank line before the last name, a duplicate name or a file without any
// name is an error naming the file and line (ErrFeatureNames).
func ReadNames(path string) ([]string, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fileErr(path, 0, err)
	}
	return parseNames(data, path)
}

// parseNames is ReadNames on content; name labels errors.
func parseNames(data []byte, name string) ([]string, error) {
	data = bytes.TrimPrefix(data, []byte("\xef\xbb\xbf"))
	lines := strings.Split(string(data), "\n")
	for len(lines) > 0 && strings.TrimSpace(lines[len(lines)-1]) == "" {
		lines = lines[:len(lines)-1]
	}
	if len(lines) == 0 {
		return nil, fileErr(name, 0, fmt.Errorf("%w: no feature names", ErrFeatureNames))
	}
	out := make([]string, len(lines))
	first := make(map[string]int, len(lines))
	for i, l := range lines {
		nm := strings.TrimSpace(l)
		if nm == "" {
			return nil, fileErr(name, i+1, fmt.Errorf("%w: blank line before the last name", ErrFeatureNames))
		}
		if prev, dup := first[nm]; dup {
			return nil, fileErr(name, i+1, fmt.Errorf("%w: name %q already on line %d", ErrFeatureNames, nm, prev))
		}
		first[nm] = i + 1
		out[i] = nm
	}
	return out, nil
}
