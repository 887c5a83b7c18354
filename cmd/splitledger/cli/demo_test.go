package cli

import (
	"bytes"
	"encoding/json"
	"flag"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"unicode/utf8"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata/")

// extractDemo writes the embedded demo files to a temporary folder.
func extractDemo(t *testing.T) string {
	t.Helper()
	dir := t.TempDir()
	if code, _, errs := run(t, "demo", "--extract", dir); code != ExitOK {
		t.Fatalf("demo --extract: exit %d: %s", code, errs)
	}
	return dir
}

func demoArgs(dir string, extra ...string) []string {
	var o compareOptions
	setDemoInputs(&o, dir)
	args := []string{"compare", "--baseline", o.baseline, "--candidate", o.candidate, "--traffic", o.tf.path,
		"--baseline-traffic", o.baselineTraffic, "--label", o.tf.label, "--group", o.tf.group,
		"--costs", o.costs, "--rows-per-day", "5000000"}
	return append(args, extra...)
}

// normalize removes what changes from run to run (times, durations, worker
// count, the temporary folder) so reports can be compared with golden files.
func normalize(s, dir string) string {
	s = strings.ReplaceAll(s, dir+string(filepath.Separator), "demo/")
	for _, r := range []struct{ re, with string }{
		{`\d{4}-\d{2}-\d{2}[ T]\d{2}:\d{2}:\d{2}(\.\d+)?( UTC|Z)?`, "TIME"},
		{`took [0-9.]+(ns|µs|ms|s|m)`, "took D"},
		{`, \d+ workers`, ", N workers"},
		{`"duration_seconds": [0-9.e-]+`, `"duration_seconds": D`},
		{`"workers": \d+`, `"workers": N`},
		{`\d{4}-\d{2}-\d{2}`, "DATE"},
	} {
		s = regexp.MustCompile(r.re).ReplaceAllString(s, r.with)
	}
	return s
}

func golden(t *testing.T, name, got string) {
	t.Helper()
	path := filepath.Join("testdata", name)
	if *update {
		if err := os.MkdirAll("testdata", 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, []byte(got), 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test ./cmd/splitledger/cli -update and review the diff)", err)
	}
	if got != string(want) {
		gl, wl := strings.Split(got, "\n"), strings.Split(string(want), "\n")
		for i := 0; i < len(gl) && i < len(wl); i++ {
			if gl[i] != wl[i] {
				t.Fatalf("%s differs at line %d:\n got  %q\n want %q\n(run go test ./cmd/splitledger/cli -update and review the diff)", path, i+1, gl[i], wl[i])
			}
		}
		t.Fatalf("%s: %d lines, want %d (run with -update and review the diff)", path, len(gl), len(wl))
	}
}

// The demo's reports, as golden files: reviewed in the diff, rewritten only
// with -update. The demo command shows its inputs as demo/<file>, so the
// reports do not depend on where the files were extracted.
func TestDemoGolden(t *testing.T) {
	for _, tc := range []struct {
		file string
		args []string
	}{
		{"demo_text.golden", []string{"--format", "text"}},
		{"demo_ascii.golden", []string{"--format", "text", "--ascii"}},
		{"demo_markdown.golden", []string{"--format", "markdown"}},
		{"demo_json.golden", []string{"--format", "json"}},
	} {
		t.Run(tc.file, func(t *testing.T) {
			code, out, errs := run(t, append([]string{"demo"}, tc.args...)...)
			if code != ExitGate {
				t.Fatalf("exit %d, want 1: %s", code, errs)
			}
			golden(t, tc.file, normalize(out, "/nonexistent"))
		})
	}
}

// The e-mail rules: no line over 100 columns; with --ascii no byte above 127.
func TestDemoTextWidthAndASCII(t *testing.T) {
	dir := extractDemo(t)
	_, out, _ := run(t, demoArgs(dir, "--format", "text")...)
	for i, line := range strings.Split(out, "\n") {
		if n := utf8.RuneCountInString(line); n > 100 {
			t.Errorf("line %d has %d columns: %q", i+1, n, line)
		}
	}
	_, out, _ = run(t, demoArgs(dir, "--format", "text", "--ascii")...)
	for i := 0; i < len(out); i++ {
		if out[i] > 127 {
			t.Fatalf("--ascii output has byte %#x at offset %d", out[i], i)
		}
	}
}

// The demo must show each hint and leave the stable features alone
// (storage/demo's scenario).
func TestDemoFindings(t *testing.T) {
	dir := extractDemo(t)
	code, out, errs := run(t, demoArgs(dir, "--format", "json")...)
	if code != ExitGate {
		t.Fatalf("exit %d, want 1 (the demo's candidate fails the gate): %s", code, errs)
	}
	var rep struct {
		Verdict string `json:"verdict"`
		Flags   []struct {
			Kind, Feature, Hint string
		} `json:"flags"`
		Removals []struct {
			Feature string
			Saving  *float64 `json:"saving_per_1k_rows"`
		} `json:"removals"`
	}
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatal(err)
	}
	hints := map[string]bool{}
	for _, f := range rep.Flags {
		hints[f.Hint] = true
	}
	for _, h := range []string{"pipeline-suspect", "model-shift", "prune"} {
		if !hints[h] {
			t.Errorf("the demo shows no %s hint", h)
		}
	}
	saved := false
	for _, r := range rep.Removals {
		if r.Saving != nil && *r.Saving > 0 {
			saved = true
		}
	}
	if !saved {
		t.Error("no removal candidate with a saving")
	}
}

// The built binary, end to end: exit 0 on pass, 1 on fail, 2 on bad input.
func TestBinaryExitCodes(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the binary")
	}
	bin := filepath.Join(t.TempDir(), "splitledger")
	build := exec.Command("go", "build", "-o", bin, ".")
	build.Dir = filepath.Join("..")
	if out, err := build.CombinedOutput(); err != nil {
		t.Fatalf("go build: %v\n%s", err, out)
	}
	dir := extractDemo(t)
	var o compareOptions
	setDemoInputs(&o, dir)
	pq := filepath.Join(t.TempDir(), "rows.parquet")
	csvToParquet(t, fixture("binary", "rows.csv"), pq)
	cases := []struct {
		name string
		args []string
		code int
	}{
		// the same model on the same traffic: nothing can change
		{"pass", []string{"compare", "--baseline", fixture("binary", "model.json"), "--candidate", fixture("binary", "model.json"),
			"--traffic", pq, "--label", "label", "--replicates", "50"}, 0},
		{"fail", demoArgs(dir), 1},
		{"bad input", []string{"compare", "--baseline", filepath.Join(dir, "nosuch.json"), "--candidate", o.candidate, "--traffic", o.tf.path}, 2},
		{"bad usage", []string{"compare", "--baseline", o.baseline}, 2},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			cmd := exec.Command(bin, tc.args...)
			var stderr bytes.Buffer
			cmd.Stderr = &stderr
			err := cmd.Run()
			code := 0
			if ee, ok := err.(*exec.ExitError); ok {
				code = ee.ExitCode()
			} else if err != nil {
				t.Fatal(err)
			}
			if code != tc.code {
				t.Fatalf("exit %d, want %d; stderr %q", code, tc.code, stderr.String())
			}
			if tc.code == 2 && strings.Count(strings.TrimSpace(stderr.String()), "\n") != 0 {
				t.Errorf("bad input should print one line, got %q", stderr.String())
			}
		})
	}
}
