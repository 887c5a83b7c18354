package history

import (
	"math"
	"testing"
	"unicode/utf8"
)

func TestSparkline(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	// Levels are linear from min to max over the finite values, rounded to
	// the nearest of eight (common practice for text sparklines); the block
	// characters are Unicode U+2581..U+2588.
	tests := []struct {
		name    string
		values  []float64
		unicode string
		ascii   string
	}{
		{"empty", nil, "", ""},
		{"eight steps", []float64{1, 2, 3, 4, 5, 6, 7, 8}, "▁▂▃▄▅▆▇█", "_.-:=+*#"},
		{"descending", []float64{0.4, 0.3, 0.2, 0.1}, "█▆▃▁", "#+-_"},
		{"half rounds up", []float64{0, 0.5, 1}, "▁▅█", "_=#"},
		{"NaN gap", []float64{0, nan, 1}, "▁ █", "_ #"},
		{"infinities are gaps", []float64{-inf, 1, 2, inf}, " ▁█ ", " _# "},
		{"flat", []float64{0.25, 0.25, 0.25}, "▄▄▄", ":::"},
		{"single", []float64{7}, "▄", ":"},
		{"all NaN", []float64{nan, nan}, "  ", "  "},
		{"huge range", []float64{1e308, -1e308, 0}, "█▁▅", "#_="},
		{"negative", []float64{-2, -1}, "▁█", "_#"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if got := Sparkline(tt.values); got != tt.unicode {
				t.Errorf("Sparkline = %q, want %q", got, tt.unicode)
			}
			if got := SparklineASCII(tt.values); got != tt.ascii {
				t.Errorf("SparklineASCII = %q, want %q", got, tt.ascii)
			}
			if n := utf8.RuneCountInString(Sparkline(tt.values)); n != len(tt.values) {
				t.Errorf("%d characters for %d values", n, len(tt.values))
			}
		})
	}
}
