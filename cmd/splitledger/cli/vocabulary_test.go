package cli

import (
	"slices"
	"sort"
	"strings"
	"testing"

	"github.com/spf13/pflag"

	"splitledger/audit"
)

// The names people see are the project's own vocabulary (flag kinds, hints
// and verdicts from the design's vocabulary list) and trade terms. Adding a
// command or an option means adding it here, where it is reviewed.
func TestVocabulary(t *testing.T) {
	wantCommands := []string{"compare", "demo", "explain", "history", "importance", "inspect", "score"}
	var got []string
	options := map[string]bool{}
	for _, c := range commands() {
		got = append(got, c.name)
		fs := newFlagSet(c)
		c.flags(fs)
		fs.VisitAll(func(f *pflag.Flag) { options[f.Name] = true })
	}
	sort.Strings(got)
	if !slices.Equal(got, wantCommands) {
		t.Errorf("commands %v, reviewed list %v", got, wantCommands)
	}
	reviewed := strings.Fields(`model-format names objective base-score num-class traffic label group weight rename
		allow-absent head max-rows out seed workers format top metric ndcg-gain no-relevant repeats replicates
		confidence shap shap-rows ascii rows class baseline candidate baseline-traffic costs rows-per-day policy
		measure fail-on quiet history print-policy extract feature version prune-before`)
	for o := range options {
		if !slices.Contains(reviewed, o) {
			t.Errorf("option --%s is not in the reviewed vocabulary", o)
		}
	}
	kinds := []string{audit.KindCollapsed, audit.KindSurged, audit.KindWentConstant, audit.KindMissingSpike,
		audit.KindOutOfRange, audit.KindShifted, audit.KindDropped, audit.KindAdded, audit.KindRemovalCandidate}
	design := strings.Fields("collapsed surged went-constant missing-spike out-of-range shifted dropped added removal-candidate")
	if !slices.Equal(kinds, design) {
		t.Errorf("flag kinds %v, design vocabulary %v", kinds, design)
	}
	hints := []string{audit.HintPipelineSuspect, audit.HintModelShift, audit.HintPrune}
	if !slices.Equal(hints, []string{"pipeline-suspect", "model-shift", "prune"}) {
		t.Errorf("hints %v", hints)
	}
	if v := []string{audit.VerdictPass, audit.VerdictWarn, audit.VerdictFail}; !slices.Equal(v, []string{"pass", "warn", "fail"}) {
		t.Errorf("verdicts %v", v)
	}
}
