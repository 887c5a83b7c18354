// Package leavesref is test support: it locates the LightGBM model files,
// rows and LightGBM's own predictions that the Go module
// github.com/dmitryikh/leaves ships in its testdata folder (a test
// requirement of this module; nothing is copied), and reads their tables.
// Tests of several packages use these files as an external reference.
package leavesref

import (
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"

	// The module ships real LightGBM models with LightGBM's own predictions
	// in its testdata folder; the blank import keeps it a requirement of
	// this module so Find can locate those files.
	_ "github.com/dmitryikh/leaves"
)

// Module is the import path of the module whose testdata holds the files.
const Module = "github.com/dmitryikh/leaves"

var (
	once sync.Once
	dir  string
	err  error
)

// Find returns the module's testdata folder, looked up once with `go list
// -m`, or the reason it cannot be found.
func Find() (string, error) {
	once.Do(func() {
		out, e := exec.Command("go", "list", "-m", "-f", "{{.Dir}}", Module).Output()
		if e != nil {
			err = e
			return
		}
		d := strings.TrimSpace(string(out))
		if d == "" {
			err = errors.New("module not in the module cache")
			return
		}
		d = filepath.Join(d, "testdata")
		if _, e := os.Stat(d); e != nil {
			err = e
			return
		}
		dir = d
	})
	return dir, err
}

// Dir is Find for a test: it skips the test when the folder is missing (an
// optional external source of reference values).
func Dir(tb testing.TB) string {
	tb.Helper()
	d, e := Find()
	if e != nil {
		tb.Skipf("LightGBM reference files of %s not found (%v); run `go mod download %s`", Module, e, Module)
	}
	return d
}

// ReadTable reads a delimited numeric text file into rows, failing the test
// on an unreadable file or cell (an empty cell included). sep "" splits on
// any run of spaces or tabs; blank lines are skipped; skip drops that many
// leading columns (a label).
func ReadTable(tb testing.TB, path, sep string, skip int) [][]float64 {
	tb.Helper()
	raw, e := os.ReadFile(path)
	if e != nil {
		tb.Fatal(e)
	}
	var rows [][]float64
	for ln, line := range strings.Split(string(raw), "\n") {
		line = strings.TrimSpace(line)
		if line == "" {
			continue
		}
		toks := strings.Fields(line)
		if sep != "" {
			toks = strings.Split(line, sep)
		}
		if len(toks) < skip {
			tb.Fatalf("%s:%d: %d columns", path, ln+1, len(toks))
		}
		row := make([]float64, 0, len(toks)-skip)
		for _, tok := range toks[skip:] {
			v, e := strconv.ParseFloat(strings.TrimSpace(tok), 64)
			if e != nil {
				tb.Fatalf("%s:%d: %v", path, ln+1, e)
			}
			row = append(row, v)
		}
		rows = append(rows, row)
	}
	return rows
}
