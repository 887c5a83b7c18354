// Package reports renders results as text, markdown, JSON, CSV and HTML.
// Renderers take an io.Writer and a plain result value; they compute
// nothing beyond formatting.
package reports

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strconv"
)

// Num is a float64 that marshals NaN and ±Inf as JSON null.
type Num float64

// MarshalJSON writes the number with the shortest exact representation, or
// null when it is not finite.
func (n Num) MarshalJSON() ([]byte, error) {
	f := float64(n)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return []byte(strconv.FormatFloat(f, 'g', -1, 64)), nil
}

// writeJSON writes v indented with a trailing newline.
func writeJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(v)
}

// fmtNum formats a value for text tables: NaN as "-", otherwise with
// significant digits suited to the magnitude.
func fmtNum(v float64) string {
	switch {
	case math.IsNaN(v):
		return "-"
	case v == 0:
		return "0"
	case math.Abs(v) >= 1e5 || math.Abs(v) < 1e-4:
		return strconv.FormatFloat(v, 'e', 2, 64)
	case math.Abs(v) >= 100:
		return strconv.FormatFloat(v, 'f', 0, 64)
	default:
		return strconv.FormatFloat(v, 'g', 4, 64)
	}
}

// fmtPct formats a share in [0,1] as a percentage with one decimal.
func fmtPct(v float64) string {
	if math.IsNaN(v) {
		return "-"
	}
	return fmt.Sprintf("%.1f%%", 100*v)
}

// fmtInterval formats "value [lo, hi]".
func fmtInterval(v, lo, hi float64) string {
	if math.IsNaN(lo) || math.IsNaN(hi) {
		return fmtNum(v)
	}
	return fmtNum(v) + " [" + fmtNum(lo) + ", " + fmtNum(hi) + "]"
}
