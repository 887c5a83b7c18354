package reports

import (
	"math"
	"strings"
)

// glyphs are the characters a text report may draw with. The ASCII set keeps
// every byte below 128 for mail clients that mangle anything else.
type glyphs struct {
	ascii bool
	// arrow joins a before and an after value, times prefixes a ratio.
	arrow, times string
	// baseBar and candBar fill the baseline and candidate share bars;
	// tinyBar marks a positive share too small for one full cell.
	baseBar, candBar, tinyBar rune
}

func newGlyphs(ascii bool) glyphs {
	if ascii {
		return glyphs{ascii: true, arrow: "->", times: "x", baseBar: '=', candBar: '#', tinyBar: '.'}
	}
	return glyphs{arrow: "→", times: "×", baseBar: '▒', candBar: '█', tinyBar: '▏'}
}

// shareBar draws share v as a bar of whole cells, scale filling width cells.
// A positive share that rounds to no cell gets one tiny mark so it is not
// mistaken for zero; NaN, a non-positive share or scale, and width <= 0 give
// "". Shares above scale are clipped to width.
func shareBar(v, scale float64, width int, fill, tiny rune) string {
	if width <= 0 || !(scale > 0) || !(v > 0) {
		return ""
	}
	n := int(math.Round(v / scale * float64(width)))
	if n > width || math.IsInf(v, 1) {
		n = width
	}
	if n == 0 {
		return string(tiny)
	}
	return strings.Repeat(string(fill), n)
}

// barScale is the largest finite share in the ledger (either version): the
// value that fills a whole bar. It is 0 when no share is positive.
func barScale(shares ...[]float64) float64 {
	m := 0.0
	for _, s := range shares {
		for _, v := range s {
			if v > m && !math.IsInf(v, 1) {
				m = v
			}
		}
	}
	return m
}
