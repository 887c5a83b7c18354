package cli

import (
	"bytes"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func run(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	code := Run(args, &out, &errb)
	return code, out.String(), errb.String()
}

func TestHelpAndVersion(t *testing.T) {
	for _, args := range [][]string{{"--help"}, {"help"}, {"--version"}, {"help", "compare"}, {"compare", "--help"}} {
		code, out, _ := run(t, args...)
		if code != ExitOK || out == "" {
			t.Errorf("%v: exit %d, output %q", args, code, out)
		}
	}
	for _, args := range [][]string{{}, {"nosuchcommand"}, {"inspect", "--nosuchflag"}, {"help", "nosuch"}} {
		code, _, errs := run(t, args...)
		if code != ExitBadInput || errs == "" {
			t.Errorf("%v: exit %d, stderr %q, want exit 2 with a message", args, code, errs)
		}
	}
}

// Every fixture format inspects; dumps need the objective (they do not
// record it).
func TestInspectFixtures(t *testing.T) {
	for _, name := range []string{"binary", "missing", "regression", "ranking", "multiclass", "categorical"} {
		for _, file := range []string{"model.json", "dump.json", "dump.txt"} {
			t.Run(name+"/"+file, func(t *testing.T) {
				var meta struct {
					Objective string  `json:"objective"`
					NumClass  int     `json:"num_class"`
					BaseScore float64 `json:"base_score"`
				}
				b, err := os.ReadFile(fixture(name, "meta.json"))
				if err != nil {
					t.Fatal(err)
				}
				if err := json.Unmarshal(b, &meta); err != nil {
					t.Fatal(err)
				}
				args := []string{"inspect", "--format", "json", fixture(name, file)}
				if file != "model.json" {
					args = append(args, "--objective", meta.Objective)
					if meta.NumClass > 0 {
						args = append(args, "--num-class", "3")
					}
				}
				code, out, errs := run(t, args...)
				if code != ExitOK {
					t.Fatalf("exit %d: %s", code, errs)
				}
				var got struct {
					Schema string `json:"schema"`
					Models []struct {
						Trees int `json:"trees"`
					} `json:"models"`
				}
				if err := json.Unmarshal([]byte(out), &got); err != nil || got.Schema != "splitledger/inspect/v1" || len(got.Models) != 1 || got.Models[0].Trees == 0 {
					t.Fatalf("bad output %v: %s", err, out)
				}
			})
		}
	}
}

// Bad input: one line on stderr naming the file, exit 2, no panic.
func TestBadModelExit2(t *testing.T) {
	dir := t.TempDir()
	good, err := os.ReadFile(fixture("binary", "model.json"))
	if err != nil {
		t.Fatal(err)
	}
	cases := map[string][]byte{
		"truncated.json": good[:len(good)/2],
		"empty.json":     {},
		"garbage.bin":    []byte("\x00\x01not a model"),
	}
	for name, content := range cases {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, content, 0o644); err != nil {
			t.Fatal(err)
		}
		code, _, errs := run(t, "inspect", p)
		if code != ExitBadInput {
			t.Errorf("%s: exit %d, want 2", name, code)
		}
		if strings.Count(strings.TrimSpace(errs), "\n") != 0 || !strings.Contains(errs, name) {
			t.Errorf("%s: stderr should be one line naming the file, got %q", name, errs)
		}
	}
}

// score on the XGBoost fixtures read from Parquet equals XGBoost 1.7.4's
// predict(output_margin=True) (testdata/models/*/margins.csv, made by
// testdata/models/make_models.py) to 1e-5.
func TestScoreMatchesXGBoost(t *testing.T) {
	for _, name := range []string{"binary", "missing", "regression", "ranking", "multiclass", "categorical"} {
		t.Run(name, func(t *testing.T) {
			pq := filepath.Join(t.TempDir(), "rows.parquet")
			csvToParquet(t, fixture(name, "rows.csv"), pq)
			out := filepath.Join(t.TempDir(), "scores.csv")
			code, _, errs := run(t, "score", fixture(name, "model.json"), "--traffic", pq, "--out", out)
			if code != ExitOK {
				t.Fatalf("exit %d: %s", code, errs)
			}
			got := readCSVFloats(t, out)[1:] // header
			want := readCSVFloats(t, fixture(name, "margins.csv"))
			if len(got) != len(want) {
				t.Fatalf("%d rows, want %d", len(got), len(want))
			}
			k := len(want[0])
			first := 1 // after the row index
			if name == "ranking" {
				first = 2 // and the group id
			}
			for r := range want {
				for c := 0; c < k; c++ {
					if d := math.Abs(got[r][first+c] - want[r][c]); !(d <= 1e-5) {
						t.Fatalf("row %d class %d: margin %v, XGBoost %v", r, c, got[r][first+c], want[r][c])
					}
				}
			}
		})
	}
}

// importance --format json carries the documented keys.
func TestImportanceJSONKeys(t *testing.T) {
	pq := filepath.Join(t.TempDir(), "rows.parquet")
	csvToParquet(t, fixture("ranking", "rows.csv"), pq)
	code, out, errs := run(t, "importance", fixture("ranking", "model.json"), "--traffic", pq, "--label", "label", "--group", "query",
		"--format", "json", "--replicates", "20")
	if code != ExitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var got struct {
		Schema   string           `json:"schema"`
		Metric   string           `json:"metric"`
		Features []map[string]any `json:"features"`
	}
	if err := json.Unmarshal([]byte(out), &got); err != nil {
		t.Fatal(err)
	}
	if got.Schema != "splitledger/importance/v1" || got.Metric != "ndcg@10" || len(got.Features) != 8 {
		t.Fatalf("schema %q metric %q features %d", got.Schema, got.Metric, len(got.Features))
	}
	for _, k := range []string{"feature", "split_count", "total_gain", "mean_gain", "total_cover", "mean_cover"} {
		if _, ok := got.Features[0][k]; !ok {
			t.Errorf("feature row lacks %q", k)
		}
	}
	for _, m := range []string{"permutation_drop", "missing_break_drop", "freeze_drop", "path_share", "tests_per_row", "mean_abs_shap"} {
		obj, ok := got.Features[0][m].(map[string]any)
		if !ok {
			t.Fatalf("feature row lacks object %q", m)
		}
		for _, k := range []string{"value", "lo", "hi", "share"} {
			if _, ok := obj[k]; !ok {
				t.Errorf("%s lacks %q", m, k)
			}
		}
	}
}

// Every --metric the model and labels allow runs end to end and names
// itself in the JSON.
func TestImportanceEveryMetric(t *testing.T) {
	pq := filepath.Join(t.TempDir(), "rows.parquet")
	csvToParquet(t, fixture("binary", "rows.csv"), pq)
	for metric, want := range map[string]string{"logloss": "logloss", "auc": "auc", "rmse": "rmse", "mean_abs_delta": "mean_abs_delta"} {
		code, out, errs := run(t, "importance", fixture("binary", "model.json"), "--traffic", pq, "--label", "label",
			"--metric", metric, "--format", "json", "--replicates", "10", "--head", "300")
		if code != ExitOK {
			t.Fatalf("--metric %s: exit %d: %s", metric, code, errs)
		}
		var got struct {
			Metric string `json:"metric"`
		}
		if err := json.Unmarshal([]byte(out), &got); err != nil || got.Metric != want {
			t.Errorf("--metric %s: metric %q (%v)", metric, got.Metric, err)
		}
	}
}

// explain: a score difference between two rows splits exactly into the sum
// of per-feature SHAP differences (the bias cancels): the local accuracy
// property of SHAP values (Lundberg, Erion & Lee 2018).
func TestExplainDifferenceIdentity(t *testing.T) {
	pq := filepath.Join(t.TempDir(), "rows.parquet")
	csvToParquet(t, fixture("missing", "rows.csv"), pq)
	for _, rows := range []string{"0,1", "5,17", "42,3"} {
		code, out, errs := run(t, "explain", fixture("missing", "model.json"), "--traffic", pq, "--rows", rows, "--format", "json")
		if code != ExitOK {
			t.Fatalf("exit %d: %s", code, errs)
		}
		var got struct {
			MarginI, MarginJ float64
			Features         []struct{ Difference float64 }
		}
		dec := json.NewDecoder(strings.NewReader(strings.NewReplacer(`"margin_i"`, `"MarginI"`, `"margin_j"`, `"MarginJ"`, `"difference"`, `"Difference"`).Replace(out)))
		if err := dec.Decode(&got); err != nil {
			t.Fatal(err)
		}
		sum := 0.0
		for _, f := range got.Features {
			sum += f.Difference
		}
		if d := math.Abs(sum - (got.MarginI - got.MarginJ)); !(d <= 1e-5) {
			t.Errorf("rows %s: SHAP differences sum to %v, margins differ by %v", rows, sum, got.MarginI-got.MarginJ)
		}
	}
	code, _, errs := run(t, "explain", fixture("missing", "model.json"), "--traffic", pq, "--rows", "0,100000")
	if code != ExitBadInput || !strings.Contains(errs, "out of range") {
		t.Errorf("row out of range: exit %d, %q", code, errs)
	}
}
