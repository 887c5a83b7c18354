package audit_test

import (
	"bytes"
	"errors"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"splitledger/audit"
)

func writeFile(t *testing.T, name, text string) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), name)
	if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func TestDefaultPolicyValidates(t *testing.T) {
	p := audit.DefaultPolicy()
	if err := p.Validate(); err != nil {
		t.Fatalf("DefaultPolicy().Validate() = %v", err)
	}
	// The documented defaults (policy.go doc comments; PSI levels 0.10 and
	// 0.25 and the factor 3 are common practice).
	checks := []struct {
		name      string
		got, want float64
	}{
		{"collapse_factor", p.CollapseFactor, 3},
		{"surge_factor", p.SurgeFactor, 3},
		{"min_share", p.MinShare, 0.02},
		{"share_floor", p.ShareFloor, 0.001},
		{"major_share", p.MajorShare, 0.05},
		{"constant_share", p.ConstantShare, 0.995},
		{"missing_spike_points", p.MissingSpikePoints, 0.20},
		{"missing_high_share", p.MissingHighShare, 0.50},
		{"rare_default_cover", p.RareDefaultCover, 0.05},
		{"out_of_range_gain_share", p.OutOfRangeGainShare, 0.25},
		{"psi_warn", p.PSIWarn, 0.10},
		{"psi_fail", p.PSIFail, 0.25},
		{"psi_bins", float64(p.PSIBins), 10},
		{"removal_tolerance", p.RemovalTolerance, 0.0005},
	}
	for _, c := range checks {
		t.Run(c.name, func(t *testing.T) {
			if c.got != c.want {
				t.Errorf("default %s = %v, want %v", c.name, c.got, c.want)
			}
		})
	}
	if p.Measure != "permutation_drop" || p.FailOnWarn {
		t.Errorf("default measure %q, fail_on_warn %v", p.Measure, p.FailOnWarn)
	}
}

func TestReadPolicyPartialKeepsDefaults(t *testing.T) {
	path := writeFile(t, "policy.json", `{"psi_warn": 0.15, "measure": "missing_break_drop", "fail_on_warn": true}`)
	got, err := audit.ReadPolicy(path)
	if err != nil {
		t.Fatal(err)
	}
	want := audit.DefaultPolicy()
	want.PSIWarn = 0.15
	want.Measure = "missing_break_drop"
	want.FailOnWarn = true
	if got != want {
		t.Errorf("ReadPolicy = %+v\nwant      %+v", got, want)
	}
}

func TestReadPolicyErrors(t *testing.T) {
	cases := []struct {
		name, text string
		// the error must name the file and contain this
		want string
	}{
		{"unknown key", `{"psi_warn": 0.1, "psi_wran": 0.2}`, "psi_wran"},
		{"bad measure name", `{"measure": "gain_total"}`, `measure "gain_total"`},
		{"value out of range", `{"constant_share": 0.3}`, "constant_share"},
		{"negative share", `{"min_share": -0.1}`, "min_share"},
		{"factor below one", `{"collapse_factor": 0.5}`, "collapse_factor"},
		{"fail level below warn level", `{"psi_warn": 0.3, "psi_fail": 0.2}`, "psi_fail"},
		{"too few bins", `{"psi_bins": 1}`, "psi_bins"},
		{"wrong type", `{"psi_bins": "ten"}`, "psi_bins"},
		{"not JSON", `psi_warn = 0.1`, "invalid character"},
		{"empty file", ``, "EOF"},
		// A second value or a stray brace after the object is not a policy
		// file either; the message wording is left to the reader.
		{"trailing data after the object", `{"psi_warn": 0.2}}`, ""},
		{"two objects", `{"psi_warn": 0.2} {"psi_fail": 0.1}`, ""},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			path := writeFile(t, "gate-policy.json", tc.text)
			_, err := audit.ReadPolicy(path)
			if err == nil {
				t.Fatal("ReadPolicy accepted the file")
			}
			if !strings.Contains(err.Error(), path) || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %q should name %s and mention %q", err, path, tc.want)
			}
		})
	}
	t.Run("missing file", func(t *testing.T) {
		path := filepath.Join(t.TempDir(), "absent.json")
		_, err := audit.ReadPolicy(path)
		if err == nil || !errors.Is(err, fs.ErrNotExist) || !strings.Contains(err.Error(), path) {
			t.Errorf("ReadPolicy(missing) = %v, want a not-exist error naming the file", err)
		}
	})
}

func TestPolicyValidateRanges(t *testing.T) {
	cases := []struct {
		name string
		edit func(*audit.Policy)
		ok   bool
	}{
		{"empty measure", func(p *audit.Policy) { p.Measure = "" }, false},
		{"constant share at its upper bound", func(p *audit.Policy) { p.ConstantShare = 1 }, true},
		{"constant share at one half", func(p *audit.Policy) { p.ConstantShare = 0.5 }, true},
		{"share floor zero", func(p *audit.Policy) { p.ShareFloor = 0 }, false},
		{"equal psi levels", func(p *audit.Policy) { p.PSIWarn, p.PSIFail = 0.2, 0.2 }, true},
		{"psi bins 1000", func(p *audit.Policy) { p.PSIBins = 1000 }, true},
		{"psi bins 1001", func(p *audit.Policy) { p.PSIBins = 1001 }, false},
		{"removal tolerance above one", func(p *audit.Policy) { p.RemovalTolerance = 1.5 }, false},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			p := audit.DefaultPolicy()
			tc.edit(&p)
			if err := p.Validate(); (err == nil) != tc.ok {
				t.Errorf("Validate() = %v, want ok=%v", err, tc.ok)
			}
		})
	}
	// every measure name the doc comment lists is accepted
	for _, m := range []string{"permutation_drop", "missing_break_drop", "freeze_drop", "mean_abs_shap", "path_share", "split_share", "gain_share", "cover_share"} {
		t.Run("measure "+m, func(t *testing.T) {
			p := audit.DefaultPolicy()
			p.Measure = m
			if err := p.Validate(); err != nil {
				t.Error(err)
			}
		})
	}
}

func TestWritePolicyRoundTrip(t *testing.T) {
	cases := []struct {
		name string
		p    audit.Policy
	}{
		{"defaults", audit.DefaultPolicy()},
		{"every field changed", audit.Policy{
			Measure: "gain_share", CollapseFactor: 4, SurgeFactor: 5, MinShare: 0.03, ShareFloor: 0.002,
			MajorShare: 0.1, ConstantShare: 0.99, MissingSpikePoints: 0.15, MissingHighShare: 0.6,
			RareDefaultCover: 0.02, OutOfRangeGainShare: 0.3, PSIWarn: 0.12, PSIFail: 0.3, PSIBins: 20,
			RemovalTolerance: 0.001, FailOnWarn: true,
		}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			var buf bytes.Buffer
			if err := audit.WritePolicy(&buf, tc.p); err != nil {
				t.Fatal(err)
			}
			path := writeFile(t, "policy.json", buf.String())
			got, err := audit.ReadPolicy(path)
			if err != nil {
				t.Fatalf("ReadPolicy of WritePolicy output: %v\n%s", err, buf.String())
			}
			if got != tc.p {
				t.Errorf("round trip = %+v\nwant        %+v", got, tc.p)
			}
		})
	}
}
