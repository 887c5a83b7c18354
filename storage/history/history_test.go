package history

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"
)

// Invented feature names from the demo scenario (holiday-rental ranking).
var sampleFeatures = []string{
	"text_match", "price_vs_area_median", "review_score", "host_response_time",
	"photo_count", "distance_to_place", "cancellation_strictness", "image_quality_score",
}

var sampleMeasures = []string{"permutation_drop", "missing_break_drop", "mean_abs_shap", "split_count"}

// sampleRun builds the i-th invented run: a week apart from the previous,
// with NaN intervals on the structure measures, a NaN point value now and
// then, infinities, and flags on a few features.
func sampleRun(i int) Run {
	start := time.Date(2031, 3, 3, 6, 30, 0, 0, time.UTC)
	run := Run{
		ID:              fmt.Sprintf("20310303T063000Z-%08x", i),
		Time:            start.AddDate(0, 0, 7*i).Add(time.Duration(i) * 1234567 * time.Microsecond),
		BaselineName:    fmt.Sprintf("ranker-w%02d.json", i),
		BaselineSHA256:  strings.Repeat(fmt.Sprintf("%x", i%16), 64),
		CandidateName:   fmt.Sprintf("ranker-w%02d.json", i+1),
		CandidateSHA256: strings.Repeat(fmt.Sprintf("%x", (i+1)%16), 64),
		TrafficName:     fmt.Sprintf("searches-w%02d.parquet", i),
		TrafficSHA256:   strings.Repeat("e", 64),
		Metric:          "ndcg@10",
		Seed:            uint64(i) * 0x9E3779B97F4A7C15, // spans the full uint64 range
		Replicates:      200,
		Verdict:         []string{VerdictPass, VerdictWarn, VerdictFail}[i%3],
	}
	if i%2 == 1 {
		run.BaselineTrafficName = fmt.Sprintf("searches-w%02d.parquet", i-1)
		run.BaselineTrafficSHA256 = strings.Repeat("d", 64)
	}
	for f, feature := range sampleFeatures {
		for _, version := range []string{VersionBaseline, VersionCandidate} {
			for m, measure := range sampleMeasures {
				v := float64(f+1)*0.01 + float64(i)*0.001 + float64(m)*1e-7
				row := FeatureRow{Feature: feature, Version: version, Measure: measure,
					Value: v, Lo: v - 0.002, Hi: v + 0.003, Share: v / 3}
				if measure == "split_count" {
					row.Value, row.Lo, row.Hi = float64(10*f+i), math.NaN(), math.NaN()
				}
				if (f+i)%5 == 0 {
					row.Value = math.NaN()
				}
				if f == 7 && m == 0 {
					row.Hi = math.Inf(1)
					row.Lo = math.Inf(-1)
				}
				if version == VersionCandidate && f == 2 && i >= 4 {
					row.Flags = []string{"collapsed"}
				}
				if version == VersionCandidate && f == 5 && i%2 == 0 {
					row.Flags = []string{"went-constant", "missing-spike"}
				}
				run.Rows = append(run.Rows, row)
			}
		}
	}
	return run
}

// sameFloat is exact equality where NaN equals NaN.
func sameFloat(a, b float64) bool {
	return a == b || math.IsNaN(a) && math.IsNaN(b)
}

// diffRun describes the first difference between want (as appended, time
// truncated to microseconds) and got (as loaded), or "".
func diffRun(want, got Run) string {
	w := want
	w.Time = want.Time.UTC().Truncate(time.Microsecond)
	if !w.Time.Equal(got.Time) || got.Time.Location() != time.UTC {
		return fmt.Sprintf("time %v, want %v UTC", got.Time, w.Time)
	}
	wm, gm := w, got
	wm.Rows, gm.Rows = nil, nil
	wm.Time, gm.Time = time.Time{}, time.Time{}
	if fmt.Sprintf("%#v", wm) != fmt.Sprintf("%#v", gm) {
		return fmt.Sprintf("metadata\n got %#v\nwant %#v", gm, wm)
	}
	if len(got.Rows) != len(w.Rows) {
		return fmt.Sprintf("%d rows, want %d", len(got.Rows), len(w.Rows))
	}
	for i, wr := range w.Rows {
		gr := got.Rows[i]
		if gr.Feature != wr.Feature || gr.Version != wr.Version || gr.Measure != wr.Measure ||
			!sameFloat(gr.Value, wr.Value) || !sameFloat(gr.Lo, wr.Lo) || !sameFloat(gr.Hi, wr.Hi) || !sameFloat(gr.Share, wr.Share) ||
			!slices.Equal(gr.Flags, wr.Flags) || (len(wr.Flags) == 0) != (gr.Flags == nil) {
			return fmt.Sprintf("row %d\n got %+v\nwant %+v", i, gr, wr)
		}
	}
	return ""
}

func mustAppend(t testing.TB, dir string, run Run) string {
	t.Helper()
	path, err := Append(dir, run)
	if err != nil {
		t.Fatalf("Append(%s): %v", run.ID, err)
	}
	return path
}

func mustLoad(t testing.TB, dir string) []Run {
	t.Helper()
	runs, warnings, err := Load(dir)
	if err != nil {
		t.Fatalf("Load: %v", err)
	}
	if len(warnings) > 0 {
		t.Fatalf("Load warnings: %q", warnings)
	}
	return runs
}

// visibleFiles lists the files under dir that a Hive-partitioned reader
// would take as table data (no "." or "_" prefix on any path element).
func visibleFiles(t *testing.T, dir string) []string {
	t.Helper()
	var files []string
	err := filepath.WalkDir(dir, func(path string, d os.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if path != dir && isHidden(d.Name()) {
			if d.IsDir() {
				return filepath.SkipDir
			}
			return nil
		}
		if !d.IsDir() {
			rel, _ := filepath.Rel(dir, path)
			files = append(files, filepath.ToSlash(rel))
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	slices.Sort(files)
	return files
}

// Round trip (common practice for storage formats): ten runs written and
// read back give identical numbers, NaN as NaN, in time order.
func TestRoundTrip(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "history") // Append creates it
	var want []Run
	for i := 0; i < 10; i++ {
		run := sampleRun(i)
		if i == 6 {
			run.Rows = nil // a run with no ledger rows is still recorded
		}
		if i == 9 {
			run.Seed = math.MaxUint64
			run.Time = run.Time.Add(987 * time.Nanosecond) // dropped: microsecond precision
			run.Time = run.Time.In(time.FixedZone("UTC+9", 9*3600))
		}
		want = append(want, run)
	}
	// Append out of time order: Load sorts.
	for _, i := range []int{3, 0, 9, 1, 2, 8, 4, 7, 5, 6} {
		path := mustAppend(t, dir, want[i])
		wantPath := filepath.Join(dir, "run_date="+want[i].Time.UTC().Format("2006-01-02"), "run-"+want[i].ID+".parquet")
		if path != wantPath {
			t.Fatalf("Append path %s, want %s", path, wantPath)
		}
	}
	got := mustLoad(t, dir)
	if len(got) != len(want) {
		t.Fatalf("Load gave %d runs, want %d", len(got), len(want))
	}
	for i := range want {
		t.Run(want[i].ID, func(t *testing.T) {
			if d := diffRun(want[i], got[i]); d != "" {
				t.Error(d)
			}
		})
	}
	if files := visibleFiles(t, dir); len(files) != 10 {
		t.Errorf("visible files %q, want 10 run files", files)
	}
}

// Append never modifies its argument (project rule: never mutate inputs).
func TestAppendKeepsInput(t *testing.T) {
	run := sampleRun(1)
	before := fmt.Sprintf("%#v", run)
	mustAppend(t, t.TempDir(), run)
	if after := fmt.Sprintf("%#v", run); after != before {
		t.Error("Append changed its argument")
	}
}

func TestAppendRejects(t *testing.T) {
	good := sampleRun(0)
	tests := []struct {
		name   string
		change func(*Run)
	}{
		{"empty ID", func(r *Run) { r.ID = "" }},
		{"hidden ID", func(r *Run) { r.ID = ".x" }},
		{"underscore ID", func(r *Run) { r.ID = "_x" }},
		{"slash in ID", func(r *Run) { r.ID = "a/b" }},
		{"space in ID", func(r *Run) { r.ID = "a b" }},
		{"long ID", func(r *Run) { r.ID = strings.Repeat("a", 129) }},
		{"zero time", func(r *Run) { r.Time = time.Time{} }},
		{"verdict", func(r *Run) { r.Verdict = "ok" }},
		{"negative replicates", func(r *Run) { r.Replicates = -1 }},
		{"replicates over int32", func(r *Run) { r.Replicates = math.MaxInt32 + 1 }},
		{"bad UTF-8 metric", func(r *Run) { r.Metric = "\xff" }},
		{"empty feature", func(r *Run) { r.Rows[0].Feature = "" }},
		{"empty measure", func(r *Run) { r.Rows[0].Measure = "" }},
		{"version", func(r *Run) { r.Rows[0].Version = "champion" }},
		{"comma in flag", func(r *Run) { r.Rows[0].Flags = []string{"collapsed,surged"} }},
		{"empty flag", func(r *Run) { r.Rows[0].Flags = []string{""} }},
		{"duplicate row", func(r *Run) { r.Rows[1] = r.Rows[0] }},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			run := good
			run.Rows = slices.Clone(good.Rows)
			tt.change(&run)
			dir := t.TempDir()
			if _, err := Append(dir, run); !errors.Is(err, ErrInvalidRun) {
				t.Fatalf("Append error %v, want ErrInvalidRun", err)
			}
			if files := visibleFiles(t, dir); len(files) != 0 {
				t.Errorf("files left: %q", files)
			}
		})
	}
	t.Run("same ID twice", func(t *testing.T) {
		dir := t.TempDir()
		mustAppend(t, dir, good)
		again := good
		again.Time = good.Time.AddDate(0, 0, 3) // another partition: still caught
		if _, err := Append(dir, again); !errors.Is(err, ErrRunExists) {
			t.Fatalf("second Append error %v, want ErrRunExists", err)
		}
	})
}

func TestNewRunID(t *testing.T) {
	at := time.Date(2031, 5, 6, 7, 8, 9, 0, time.FixedZone("UTC-2", -7200))
	a, b := NewRunID(at), NewRunID(at)
	if !strings.HasPrefix(a, "20310506T090809Z-") || len(a) != len("20310506T090809Z-")+8 {
		t.Errorf("NewRunID = %q, want 20310506T090809Z-<8 hex>", a)
	}
	if a == b {
		t.Errorf("two IDs in the same second collide: %q", a)
	}
	if err := validateID(a); err != nil {
		t.Error(err)
	}
}

func TestLoadMissingDir(t *testing.T) {
	runs, warnings, err := Load(filepath.Join(t.TempDir(), "none"))
	if err != nil || runs != nil || warnings != nil {
		t.Errorf("Load(missing) = %v, %q, %v; want nothing", runs, warnings, err)
	}
	file := filepath.Join(t.TempDir(), "plain")
	os.WriteFile(file, nil, 0o644)
	if _, _, err := Load(file); err == nil {
		t.Error("Load(a file) gave no error")
	}
}

// Damaged or misplaced files are skipped with a warning naming them, and the
// good runs still load (project rule: never silently).
func TestLoadWarnings(t *testing.T) {
	dir := t.TempDir()
	good := []Run{sampleRun(0), sampleRun(1)}
	path0 := mustAppend(t, dir, good[0])
	mustAppend(t, dir, good[1])
	valid, err := os.ReadFile(path0)
	if err != nil {
		t.Fatal(err)
	}
	part := filepath.Dir(path0)
	// A valid file of another run with a different schema version marker is
	// built by rewriting the marker value in place (same length).
	reversioned := bytes.Replace(valid, []byte("splitledger.history.schema\x18\x011"), []byte("splitledger.history.schema\x18\x019"), 1)
	if bytes.Equal(reversioned, valid) {
		t.Fatal("schema marker not found in the file bytes")
	}
	flipped := slices.Clone(valid)
	flipped[len(flipped)/2] ^= 0xff
	other := sampleRun(2)
	otherPath := mustAppend(t, t.TempDir(), other)
	otherBytes, _ := os.ReadFile(otherPath)
	wrongDay := sampleRun(3)
	wrongDayBytes, _ := os.ReadFile(mustAppend(t, t.TempDir(), wrongDay))

	files := []struct {
		rel, content string
		warn         string // start of the warning for this file; "" for none
		named        string // the path the warning names, when not rel
	}{
		{"run_date=2031-03-03/run-garbage.parquet", "not parquet at all", "skipped", ""},
		{"run_date=2031-03-03/run-empty.parquet", "", "skipped", ""},
		{"run_date=2031-03-03/run-truncated.parquet", string(valid[:len(valid)/2]), "skipped", ""},
		{"run_date=2031-03-03/run-tail.parquet", string(valid[:len(valid)-3]), "skipped", ""},
		{"run_date=2031-03-03/run-version9.parquet", string(reversioned), "skipped", ""},
		{"run_date=2031-03-03/run-renamed.parquet", string(otherBytes), "skipped", ""},
		{"run_date=2031-03-10/run-" + good[0].ID + ".parquet", string(valid), "skipped", ""},
		{"run_date=2031-03-03/run-" + wrongDay.ID + ".parquet", string(wrongDayBytes), "kept", ""},
		{"run_date=2031-03-03/notes.txt", "hello", "ignored", ""},
		{"run_date=2031-3-3/run-x.parquet", string(valid), "ignored", "run_date=2031-3-3"},
		{"loose.parquet", string(valid), "ignored", ""},
		{"run_date=2031-03-03/.run-x-1.tmp", "partial", "", ""},
		{"_SUCCESS", "", "", ""},
	}
	for _, f := range files {
		path := filepath.Join(dir, filepath.FromSlash(f.rel))
		os.MkdirAll(filepath.Dir(path), 0o755)
		if err := os.WriteFile(path, []byte(f.content), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	// Corruption inside a page may or may not be detectable (no checksums);
	// it must never panic, and if caught it must warn.
	flippedPath := filepath.Join(part, "run-flipped.parquet")
	os.WriteFile(flippedPath, flipped, 0o644)

	runs, warnings, err := Load(dir)
	if err != nil {
		t.Fatal(err)
	}
	var ids []string
	for _, r := range runs {
		ids = append(ids, r.ID)
	}
	wantIDs := []string{good[0].ID, good[1].ID, wrongDay.ID}
	if !slices.Equal(ids, wantIDs) {
		t.Errorf("loaded %q, want %q", ids, wantIDs)
	}
	for _, f := range files {
		t.Run(f.rel, func(t *testing.T) {
			named := f.rel
			if f.named != "" {
				named = f.named
			}
			path := filepath.Join(dir, filepath.FromSlash(named))
			var hit []string
			for _, w := range warnings {
				if strings.Contains(w, " "+path+":") {
					hit = append(hit, w)
				}
			}
			if f.warn == "" {
				if len(hit) != 0 {
					t.Errorf("unexpected warnings %q", hit)
				}
				return
			}
			if len(hit) != 1 || !strings.HasPrefix(hit[0], f.warn) {
				t.Errorf("warnings %q, want one starting %q", hit, f.warn)
			}
		})
	}
	// Whether or not the reader notices the flipped byte, the file records
	// another run's ID under its name, so it is always skipped.
	if n := countContaining(warnings, " "+flippedPath+":"); n != 1 {
		t.Errorf("%d warnings name %s, want 1", n, flippedPath)
	}
}

func countContaining(list []string, s string) int {
	n := 0
	for _, x := range list {
		if strings.Contains(x, s) {
			n++
		}
	}
	return n
}

// failingWriter passes limit bytes through and then fails.
type failingWriter struct {
	w     io.Writer
	limit int
}

var errInjected = errors.New("injected write failure")

func (f *failingWriter) Write(p []byte) (int, error) {
	if len(p) > f.limit {
		n, _ := f.w.Write(p[:f.limit])
		f.limit = 0
		return n, errInjected
	}
	f.limit -= len(p)
	return f.w.Write(p)
}

// A writer failing part-way leaves the dataset as it was: earlier runs
// intact, no file visible, no temporary file left, lock released.
func TestAppendFailingWriter(t *testing.T) {
	for _, limit := range []int{0, 4, 100, 2000} {
		t.Run(fmt.Sprint(limit, " bytes"), func(t *testing.T) {
			dir := t.TempDir()
			earlier := []Run{sampleRun(0), sampleRun(1)}
			for _, r := range earlier {
				mustAppend(t, dir, r)
			}
			before := visibleFiles(t, dir)
			failing := sampleRun(2)
			_, err := appendRun(dir, failing, func(w io.Writer) io.Writer { return &failingWriter{w: w, limit: limit} })
			if !errors.Is(err, errInjected) {
				t.Fatalf("appendRun error %v, want the injected failure", err)
			}
			if after := visibleFiles(t, dir); !slices.Equal(after, before) {
				t.Errorf("visible files %q, want %q", after, before)
			}
			matches, _ := filepath.Glob(filepath.Join(dir, "*", ".run-*"))
			if len(matches) != 0 {
				t.Errorf("temporary files left: %q", matches)
			}
			runs := mustLoad(t, dir)
			if len(runs) != 2 || diffRun(earlier[0], runs[0]) != "" || diffRun(earlier[1], runs[1]) != "" {
				t.Errorf("earlier runs damaged: %d runs", len(runs))
			}
			mustAppend(t, dir, failing) // the lock was released
		})
	}
}
