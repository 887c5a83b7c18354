package demo

import (
	"bytes"
	"compress/gzip"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"github.com/parquet-go/parquet-go"
)

// truth is the part of truth.json (written by testdata/planted/make_planted.py)
// that the tests read.
type truth struct {
	Features []string `json:"features"`
	Rounds   int      `json:"rounds"`
	Rows     struct {
		Baseline  int `json:"traffic_baseline"`
		Candidate int `json:"traffic_candidate"`
	} `json:"rows"`
	Roles struct {
		PipelineFault  string   `json:"pipeline_fault"`
		Surge          string   `json:"surge"`
		WentConstant   string   `json:"went_constant"`
		NoSignalCostly []string `json:"no_signal_costly"`
		Stable         []string `json:"stable"`
		Unpriced       string   `json:"unpriced"`
	} `json:"roles"`
	PipelineFault struct {
		MissingShare float64 `json:"missing_share_candidate"`
	} `json:"pipeline_fault"`
	WentConstant struct {
		Value float64 `json:"value"`
	} `json:"went_constant"`
}

func readTruth(t *testing.T) truth {
	t.Helper()
	data, err := fs.ReadFile(Files(), Truth)
	if err != nil {
		t.Fatal(err)
	}
	var tr truth
	if err := json.Unmarshal(data, &tr); err != nil {
		t.Fatalf("%s: %v", Truth, err)
	}
	if len(tr.Features) == 0 {
		t.Fatalf("%s lists no features", Truth)
	}
	return tr
}

func TestFilesListed(t *testing.T) {
	want := []string{BaselineModel, CandidateModel, BaselineTraffic, CandidateTraffic, Costs, Truth, Readme}
	var got []string
	err := fs.WalkDir(Files(), ".", func(name string, d fs.DirEntry, err error) error {
		if err == nil && !d.IsDir() {
			got = append(got, name)
		}
		return err
	})
	if err != nil {
		t.Fatal(err)
	}
	slices.Sort(want)
	if !slices.Equal(got, want) {
		t.Errorf("embedded files %v, want %v", got, want)
	}
}

// The models are gzipped save_model JSON (XGBoost 1.7.4 JSON model schema:
// learner.objective.name, learner.feature_names,
// gradient_booster.model.gbtree_model_param.num_trees).
func TestModels(t *testing.T) {
	tr := readTruth(t)
	for _, name := range []string{BaselineModel, CandidateModel} {
		t.Run(name, func(t *testing.T) {
			f, err := Files().Open(name)
			if err != nil {
				t.Fatal(err)
			}
			defer f.Close()
			zr, err := gzip.NewReader(f)
			if err != nil {
				t.Fatalf("gunzip: %v", err)
			}
			var m struct {
				Learner struct {
					FeatureNames []string `json:"feature_names"`
					Objective    struct {
						Name string `json:"name"`
					} `json:"objective"`
					GradientBooster struct {
						Model struct {
							Param struct {
								NumTrees string `json:"num_trees"`
							} `json:"gbtree_model_param"`
						} `json:"model"`
					} `json:"gradient_booster"`
				} `json:"learner"`
			}
			if err := json.NewDecoder(zr).Decode(&m); err != nil {
				t.Fatalf("decode: %v", err)
			}
			if got := m.Learner.Objective.Name; got != "rank:pairwise" {
				t.Errorf("objective %q, want rank:pairwise", got)
			}
			if got, want := m.Learner.GradientBooster.Model.Param.NumTrees, fmt.Sprint(tr.Rounds); got != want {
				t.Errorf("num_trees %s, want %s", got, want)
			}
			if !slices.Equal(m.Learner.FeatureNames, tr.Features) {
				t.Errorf("feature names %v, want %v", m.Learner.FeatureNames, tr.Features)
			}
		})
	}
}

// column holds one traffic column: values (NaN for null) and the null count.
type column struct {
	values []float64
	nulls  int
}

// readTraffic reads an embedded Parquet file into columns by name and
// checks its schema: the group column required INT64, the label required
// INT32, every feature an optional DOUBLE, in truth.json's order.
func readTraffic(t *testing.T, name string, features []string) map[string]*column {
	t.Helper()
	data, err := fs.ReadFile(Files(), name)
	if err != nil {
		t.Fatal(err)
	}
	f, err := parquet.OpenFile(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	names := append(append([]string{GroupColumn}, features...), LabelColumn)
	fields := f.Schema().Fields()
	if len(fields) != len(names) {
		t.Fatalf("%s: %d columns, want %d", name, len(fields), len(names))
	}
	for i, fl := range fields {
		want := parquet.Double
		optional := true
		switch names[i] {
		case GroupColumn:
			want, optional = parquet.Int64, false
		case LabelColumn:
			want, optional = parquet.Int32, false
		}
		if fl.Name() != names[i] || fl.Type().Kind() != want || fl.Optional() != optional {
			t.Fatalf("%s column %d: %s %v optional=%v, want %s %v optional=%v",
				name, i, fl.Name(), fl.Type().Kind(), fl.Optional(), names[i], want, optional)
		}
	}
	cols := map[string]*column{}
	for _, n := range names {
		cols[n] = &column{}
	}
	buf := make([]parquet.Row, 256)
	for _, rg := range f.RowGroups() {
		rows := rg.Rows()
		for {
			n, err := rows.ReadRows(buf)
			for _, row := range buf[:n] {
				for _, v := range row {
					c := cols[names[v.Column()]]
					switch {
					case v.IsNull():
						c.values = append(c.values, math.NaN())
						c.nulls++
					case v.Kind() == parquet.Int64:
						c.values = append(c.values, float64(v.Int64()))
					case v.Kind() == parquet.Int32:
						c.values = append(c.values, float64(v.Int32()))
					default:
						c.values = append(c.values, v.Double())
					}
				}
			}
			if errors.Is(err, io.EOF) {
				break
			}
			if err != nil {
				t.Fatalf("%s: read rows: %v", name, err)
			}
		}
		rows.Close()
	}
	return cols
}

// The traffic files hold what make_planted.py planted (its truth.json is
// the reference).
func TestTraffic(t *testing.T) {
	tr := readTruth(t)
	base := readTraffic(t, BaselineTraffic, tr.Features)
	cand := readTraffic(t, CandidateTraffic, tr.Features)

	t.Run("rows", func(t *testing.T) {
		if got := len(base[GroupColumn].values); got != tr.Rows.Baseline {
			t.Errorf("baseline rows %d, want %d", got, tr.Rows.Baseline)
		}
		if got := len(cand[GroupColumn].values); got != tr.Rows.Candidate {
			t.Errorf("candidate rows %d, want %d", got, tr.Rows.Candidate)
		}
	})
	t.Run("searches contiguous and labels graded", func(t *testing.T) {
		for name, cols := range map[string]map[string]*column{"baseline": base, "candidate": cand} {
			seen := map[float64]bool{}
			ids := cols[GroupColumn].values
			for i, id := range ids {
				if i > 0 && id != ids[i-1] && seen[id] {
					t.Fatalf("%s: search %v split at row %d", name, id, i)
				}
				seen[id] = true
			}
			for i, y := range cols[LabelColumn].values {
				if y != 0 && y != 1 && y != 2 {
					t.Fatalf("%s: row %d label %v, want 0, 1 or 2", name, i, y)
				}
			}
		}
	})
	t.Run("pipeline fault is a missing spike", func(t *testing.T) {
		f := tr.Roles.PipelineFault
		b := float64(base[f].nulls) / float64(len(base[f].values))
		c := float64(cand[f].nulls) / float64(len(cand[f].values))
		// planted: natural missingness about 3%, candidate loses a further
		// MissingShare of rows (make_planted.py)
		if !(b < 0.1) || !(c > tr.PipelineFault.MissingShare-0.05) {
			t.Errorf("%s missing share baseline %.3f candidate %.3f, want < 0.1 and > %.2f",
				f, b, c, tr.PipelineFault.MissingShare-0.05)
		}
	})
	t.Run("went constant in candidate traffic only", func(t *testing.T) {
		f := tr.Roles.WentConstant
		for i, v := range cand[f].values {
			if v != tr.WentConstant.Value {
				t.Fatalf("candidate %s row %d = %v, want %v", f, i, v, tr.WentConstant.Value)
			}
		}
		distinct := map[float64]bool{}
		for _, v := range base[f].values {
			distinct[v] = true
		}
		if len(distinct) < 10 || distinct[tr.WentConstant.Value] {
			t.Errorf("baseline %s: %d distinct values (stuck value present: %v), want a spread without it",
				f, len(distinct), distinct[tr.WentConstant.Value])
		}
	})
}

// The cost catalog prices every feature except the unpriced one.
func TestCosts(t *testing.T) {
	tr := readTruth(t)
	data, err := fs.ReadFile(Files(), Costs)
	if err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(bytes.NewReader(data)).ReadAll()
	if err != nil {
		t.Fatalf("%s: %v", Costs, err)
	}
	if want := []string{"feature", "cost_per_1k_rows", "unit", "group"}; !slices.Equal(recs[0], want) {
		t.Fatalf("header %v, want %v", recs[0], want)
	}
	priced := map[string]bool{}
	for _, r := range recs[1:] {
		priced[r[0]] = true
		if !slices.Contains(tr.Features, r[0]) {
			t.Errorf("catalog prices unknown feature %q", r[0])
		}
	}
	for _, f := range tr.Features {
		if priced[f] == (f == tr.Roles.Unpriced) {
			t.Errorf("feature %q priced=%v, want %v", f, priced[f], f != tr.Roles.Unpriced)
		}
	}
}

func TestExtract(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "new", "folder")
	paths, err := Extract(dir)
	if err != nil {
		t.Fatalf("Extract: %v", err)
	}
	if len(paths) != 7 {
		t.Fatalf("wrote %d files, want 7", len(paths))
	}
	for _, p := range paths {
		got, err := os.ReadFile(p)
		if err != nil {
			t.Fatal(err)
		}
		want, err := fs.ReadFile(Files(), filepath.Base(p))
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(got, want) {
			t.Errorf("%s differs from the embedded file", p)
		}
	}

	t.Run("refuses to overwrite", func(t *testing.T) {
		if _, err := Extract(dir); !errors.Is(err, fs.ErrExist) {
			t.Fatalf("second Extract: %v, want fs.ErrExist", err)
		}
	})
	t.Run("writes nothing when one file exists", func(t *testing.T) {
		other := t.TempDir()
		mine := filepath.Join(other, Costs)
		if err := os.WriteFile(mine, []byte("mine\n"), 0o644); err != nil {
			t.Fatal(err)
		}
		if _, err := Extract(other); !errors.Is(err, fs.ErrExist) {
			t.Fatalf("Extract: %v, want fs.ErrExist", err)
		}
		entries, err := os.ReadDir(other)
		if err != nil {
			t.Fatal(err)
		}
		if len(entries) != 1 {
			t.Errorf("folder holds %d entries after a refused Extract, want 1", len(entries))
		}
		if got, _ := os.ReadFile(mine); string(got) != "mine\n" {
			t.Errorf("existing file changed to %q", got)
		}
	})
}

func ExampleFiles() {
	entries, err := fs.ReadDir(Files(), ".")
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, e := range entries {
		fmt.Println(e.Name())
	}
	// Output:
	// README.md
	// baseline.json.gz
	// candidate.json.gz
	// costs.csv
	// traffic_baseline.parquet
	// traffic_candidate.parquet
	// truth.json
}

// The demo is the planted scenario's seed 1, byte for byte
// (testdata/planted/make_all.sh copies it).
func TestSameAsPlantedSeed1(t *testing.T) {
	seed1 := filepath.Join("..", "..", "testdata", "planted", "seed1")
	for _, name := range []string{BaselineModel, CandidateModel, BaselineTraffic, CandidateTraffic, Costs, Truth} {
		t.Run(name, func(t *testing.T) {
			want, err := os.ReadFile(filepath.Join(seed1, name))
			if err != nil {
				t.Fatalf("planted fixture missing (rebuild with testdata/planted/make_all.sh): %v", err)
			}
			got, err := fs.ReadFile(Files(), name)
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(got, want) {
				t.Errorf("embedded %s differs from testdata/planted/seed1/%s", name, name)
			}
		})
	}
}
