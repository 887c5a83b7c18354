package audit

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
)

// Policy holds every threshold of the flag rules. DefaultPolicy documents
// the defaults; a JSON policy file overrides any subset of them.
type Policy struct {
	// Measure is the primary traffic measure compared across versions:
	// permutation_drop (default), missing_break_drop, freeze_drop,
	// mean_abs_shap, path_share, or a structure share: split_share,
	// gain_share, cover_share.
	Measure string `json:"measure"`
	// CollapseFactor and SurgeFactor: a share that fell (rose) by at least
	// this factor, with the bootstrap interval of the log share ratio
	// excluding 0, is flagged. Default 3 (common practice).
	CollapseFactor float64 `json:"collapse_factor"`
	SurgeFactor    float64 `json:"surge_factor"`
	// MinShare: collapse/surge need one of the two shares at least this
	// large, so tiny features do not flag on noise. Default 0.02.
	MinShare float64 `json:"min_share"`
	// ShareFloor is added to both shares before taking their ratio, so a
	// share of 0 gives a finite ratio. Default 0.001.
	ShareFloor float64 `json:"share_floor"`
	// MajorShare: a collapsed, dropped or constant feature with at least
	// this baseline share is a fail rather than a warn. Default 0.05.
	MajorShare float64 `json:"major_share"`
	// ConstantShare: a feature whose most common value covers at least
	// this share of rows is constant. Default 0.995.
	ConstantShare float64 `json:"constant_share"`
	// MissingSpikePoints: rise in missing share between the samples that
	// flags (0.20 = 20 points). Default 0.20.
	MissingSpikePoints float64 `json:"missing_spike_points"`
	// MissingHighShare and RareDefaultCover: without a baseline sample, a
	// missing share of at least MissingHighShare flags when the training
	// cover share of the default branches is below RareDefaultCover.
	// Defaults 0.50 and 0.05.
	MissingHighShare float64 `json:"missing_high_share"`
	RareDefaultCover float64 `json:"rare_default_cover"`
	// OutOfRangeGainShare: share of a feature's gain on splits no traffic
	// row can reach (threshold outside the sample's range) that flags a
	// warn (half of it an info). Default 0.25.
	OutOfRangeGainShare float64 `json:"out_of_range_gain_share"`
	// PSIWarn and PSIFail: population stability index levels (common
	// practice, no published source). Defaults 0.10 and 0.25. PSIBins caps
	// the bins (model thresholds merged to about this many). Default 10.
	PSIWarn float64 `json:"psi_warn"`
	PSIFail float64 `json:"psi_fail"`
	PSIBins int     `json:"psi_bins"`
	// RemovalTolerance: a feature is a removal candidate when the upper
	// bounds of its missing-break and permutation drops are below this
	// fraction of the baseline metric value. Default 0.0005 (0.05%).
	RemovalTolerance float64 `json:"removal_tolerance"`
	// FailOnWarn makes a warn verdict exit 1 (also --fail-on warn).
	FailOnWarn bool `json:"fail_on_warn"`
}

// DefaultPolicy returns the documented defaults.
func DefaultPolicy() Policy {
	return Policy{
		Measure:             "permutation_drop",
		CollapseFactor:      3,
		SurgeFactor:         3,
		MinShare:            0.02,
		ShareFloor:          0.001,
		MajorShare:          0.05,
		ConstantShare:       0.995,
		MissingSpikePoints:  0.20,
		MissingHighShare:    0.50,
		RareDefaultCover:    0.05,
		OutOfRangeGainShare: 0.25,
		PSIWarn:             0.10,
		PSIFail:             0.25,
		PSIBins:             10,
		RemovalTolerance:    0.0005,
	}
}

// ReadPolicy reads a JSON policy file over the defaults. Unknown keys and
// out-of-range values are errors naming the file.
func ReadPolicy(path string) (Policy, error) {
	p := DefaultPolicy()
	b, err := os.ReadFile(path)
	if err != nil {
		return p, fmt.Errorf("policy %s: %w", path, err)
	}
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&p); err != nil {
		return p, fmt.Errorf("policy %s: %w", path, err)
	}
	if _, err := dec.Token(); !errors.Is(err, io.EOF) {
		return p, fmt.Errorf("policy %s: unexpected data after the JSON object", path)
	}
	if err := p.Validate(); err != nil {
		return p, fmt.Errorf("policy %s: %w", path, err)
	}
	return p, nil
}

// Validate checks that every threshold is in its range.
func (p Policy) Validate() error {
	switch p.Measure {
	case "permutation_drop", "missing_break_drop", "freeze_drop", "mean_abs_shap", "path_share",
		"split_share", "gain_share", "cover_share":
	default:
		return fmt.Errorf("measure %q: want permutation_drop, missing_break_drop, freeze_drop, mean_abs_shap, path_share, split_share, gain_share or cover_share", p.Measure)
	}
	checks := []struct {
		name   string
		v      float64
		lo, hi float64
	}{
		{"collapse_factor", p.CollapseFactor, 1, 1e9},
		{"surge_factor", p.SurgeFactor, 1, 1e9},
		{"min_share", p.MinShare, 0, 1},
		{"share_floor", p.ShareFloor, 1e-12, 1},
		{"major_share", p.MajorShare, 0, 1},
		{"constant_share", p.ConstantShare, 0.5, 1},
		{"missing_spike_points", p.MissingSpikePoints, 0, 1},
		{"missing_high_share", p.MissingHighShare, 0, 1},
		{"rare_default_cover", p.RareDefaultCover, 0, 1},
		{"out_of_range_gain_share", p.OutOfRangeGainShare, 0, 1},
		{"psi_warn", p.PSIWarn, 0, 1e9},
		{"psi_fail", p.PSIFail, 0, 1e9},
		{"removal_tolerance", p.RemovalTolerance, 0, 1},
	}
	for _, c := range checks {
		if !(c.v >= c.lo && c.v <= c.hi) {
			return fmt.Errorf("%s = %v: want a value in [%v, %v]", c.name, c.v, c.lo, c.hi)
		}
	}
	if p.PSIFail < p.PSIWarn {
		return fmt.Errorf("psi_fail %v is below psi_warn %v", p.PSIFail, p.PSIWarn)
	}
	if p.PSIBins < 2 || p.PSIBins > 1000 {
		return fmt.Errorf("psi_bins = %d: want 2 to 1000", p.PSIBins)
	}
	return nil
}

// WritePolicy writes p as indented JSON (the format ReadPolicy reads).
func WritePolicy(w io.Writer, p Policy) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(p)
}
