package cli

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"
	"testing"
)

// The planted scenario (testdata/planted, made by make_planted.py with
// Debian's XGBoost 1.7.4 on invented data): over five generator seeds,
// exactly the planted flags fire with the expected hints, and no stable
// feature is flagged.
func TestPlantedScenario(t *testing.T) {
	for seed := 1; seed <= 5; seed++ {
		t.Run(fmt.Sprintf("seed%d", seed), func(t *testing.T) {
			dir := filepath.Join("..", "..", "..", "testdata", "planted", fmt.Sprintf("seed%d", seed))
			var truth struct {
				Roles struct {
					PipelineFault  string   `json:"pipeline_fault"`
					Surge          string   `json:"surge"`
					WentConstant   string   `json:"went_constant"`
					NoSignalCostly []string `json:"no_signal_costly"`
					Stable         []string `json:"stable"`
				} `json:"roles"`
			}
			b, err := os.ReadFile(filepath.Join(dir, "truth.json"))
			if err != nil {
				t.Fatal(err)
			}
			if err := json.Unmarshal(b, &truth); err != nil {
				t.Fatal(err)
			}
			code, out, errs := run(t, "compare",
				"--baseline", filepath.Join(dir, "baseline.json.gz"), "--candidate", filepath.Join(dir, "candidate.json.gz"),
				"--traffic", filepath.Join(dir, "traffic_candidate.parquet"), "--baseline-traffic", filepath.Join(dir, "traffic_baseline.parquet"),
				"--label", "booked", "--group", "search_id", "--costs", filepath.Join(dir, "costs.csv"), "--format", "json", "--shap=false")
			if code != ExitGate {
				t.Fatalf("exit %d, want 1 (a planted pipeline fault fails the gate): %s", code, errs)
			}
			var rep struct {
				Flags []struct {
					Kind, Feature, Hint, Severity string
				} `json:"flags"`
			}
			if err := json.Unmarshal([]byte(out), &rep); err != nil {
				t.Fatal(err)
			}
			kinds := map[string][]string{}
			hint := map[string]string{}
			for _, f := range rep.Flags {
				kinds[f.Feature] = append(kinds[f.Feature], f.Kind)
				hint[f.Feature] = f.Hint
			}
			for k := range kinds {
				sort.Strings(kinds[k])
			}
			has := func(feature, kind string) bool { return slices.Contains(kinds[feature], kind) }
			r := truth.Roles
			// the pipeline fault: use collapsed with a missing spike
			if !has(r.PipelineFault, "collapsed") || !has(r.PipelineFault, "missing-spike") || hint[r.PipelineFault] != "pipeline-suspect" {
				t.Errorf("pipeline fault %s: flags %v hint %q", r.PipelineFault, kinds[r.PipelineFault], hint[r.PipelineFault])
			}
			// the surge: a model shift
			if !has(r.Surge, "surged") || hint[r.Surge] != "model-shift" {
				t.Errorf("surge %s: flags %v hint %q", r.Surge, kinds[r.Surge], hint[r.Surge])
			}
			// the constant feature in candidate traffic
			if !has(r.WentConstant, "went-constant") || hint[r.WentConstant] != "pipeline-suspect" {
				t.Errorf("went-constant %s: flags %v hint %q", r.WentConstant, kinds[r.WentConstant], hint[r.WentConstant])
			}
			// the costly features without signal: removal candidates (or
			// unused by the candidate), never a quality flag
			for _, f := range r.NoSignalCostly {
				for _, k := range kinds[f] {
					if k != "removal-candidate" && k != "added" && k != "dropped" {
						t.Errorf("costly no-signal %s: unexpected flag %s", f, k)
					}
				}
				if !has(f, "removal-candidate") {
					t.Errorf("costly no-signal %s: not named a removal candidate (flags %v)", f, kinds[f])
				}
			}
			// stable features: nothing
			for _, f := range r.Stable {
				if len(kinds[f]) > 0 {
					t.Errorf("stable feature %s flagged: %s", f, strings.Join(kinds[f], ", "))
				}
			}
		})
	}
}
