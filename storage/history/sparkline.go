package history

import (
	"math"
	"strings"
)

// Levels of Sparkline and SparklineASCII, lowest first.
var (
	sparkBlocks = []rune("▁▂▃▄▅▆▇█")
	sparkASCII  = []rune("_.-:=+*#")
)

// Sparkline draws values as one line of Unicode block characters
// (U+2581..U+2588), one per value, scaled linearly from the smallest finite
// value (lowest block) to the largest (full block) and rounded to the nearest
// of the eight levels. NaN and ±Inf are drawn as a space (a gap). When all
// finite values are equal the line is flat at the middle level (▄), since
// there is no range to show. Empty input gives "".
func Sparkline(values []float64) string { return sparkline(values, sparkBlocks) }

// SparklineASCII is Sparkline for plain-ASCII reports, with the eight levels
// "_.-:=+*#" (lowest first), the same scaling, a space for NaN and ±Inf, and
// ":" for a flat line.
func SparklineASCII(values []float64) string { return sparkline(values, sparkASCII) }

func sparkline(values []float64, levels []rune) string {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, v := range values {
		if !math.IsNaN(v) && !math.IsInf(v, 0) {
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
	}
	top := len(levels) - 1
	var b strings.Builder
	for _, v := range values {
		switch {
		case math.IsNaN(v) || math.IsInf(v, 0):
			b.WriteByte(' ')
		case hi == lo:
			b.WriteRune(levels[top/2])
		default:
			// (v-lo)/(hi-lo) can overflow to Inf for a huge range; scale
			// both terms first.
			f := (v/2 - lo/2) / (hi/2 - lo/2)
			b.WriteRune(levels[int(math.Round(f*float64(top)))])
		}
	}
	return b.String()
}
