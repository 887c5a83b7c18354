package metrics

import (
	"fmt"
	"math"
	"slices"
)

// Ranking is a binary-labelled score vector sorted once, so that ROC AUC
// can be evaluated under many weightings (one per bootstrap replicate) in
// O(n) each, and re-sorted for new scores (one per permutation repeat)
// without allocating. The zero value is ready to use; Rank fills it. A
// Ranking must not be shared by goroutines while Rank runs.
type Ranking struct {
	// order[p] is the row at sorted position p, by ascending score.
	order []int32
	// flags[p]: bit 0 set for a positive row, bit 1 set when position p
	// ends its block of tied scores.
	flags []uint8
	// sort buffers, kept for reuse
	keys, keysTmp []uint64
	orderTmp      []int32
	counts        *radixCounts
}

const (
	flagPositive uint8 = 1 << iota
	flagBlockEnd
)

// Rank sorts scores and records labels for later AUC calls, reusing the
// buffers of earlier calls. It returns an error naming the row for a NaN
// score (wrapping ErrScore) or a label other than 0 and 1 (wrapping
// ErrLabel); the Ranking is then empty. −0 and +0 tie; ±Inf are ordinary
// scores. The sort is an LSD radix sort on the scores' bit patterns, O(n).
// scores and labels must have equal lengths.
func (r *Ranking) Rank(scores, labels []float64) error {
	sameLength("Ranking.Rank", len(scores), len(labels))
	n := len(scores)
	if n > math.MaxInt32 {
		panic(fmt.Sprintf("metrics: Ranking.Rank: %d rows exceed the int32 row index", n))
	}
	r.keys = slices.Grow(r.keys[:0], n)[:n]
	r.order = slices.Grow(r.order[:0], n)[:n]
	r.flags = slices.Grow(r.flags[:0], n)[:n]
	for i, s := range scores {
		if s != s {
			r.reset()
			return fmt.Errorf("row %d: score is NaN: %w", i, ErrScore)
		}
		r.keys[i] = sortKey(s)
		r.order[i] = int32(i)
	}
	if n <= insertionLimit {
		insertionSortKeys(r.keys, r.order)
	} else {
		r.keysTmp = slices.Grow(r.keysTmp[:0], n)[:n]
		r.orderTmp = slices.Grow(r.orderTmp[:0], n)[:n]
		if r.counts == nil {
			r.counts = new(radixCounts)
		}
		radixSortKeys(&r.keys, &r.order, &r.keysTmp, &r.orderTmp, r.counts)
	}
	for p, row := range r.order {
		var f uint8
		switch labels[row] {
		case 1:
			f = flagPositive
		case 0:
		default:
			err := fmt.Errorf("row %d: binary label %v is not 0 or 1: %w", row, labels[row], ErrLabel)
			r.reset()
			return err
		}
		if p == n-1 || r.keys[p] != r.keys[p+1] {
			f |= flagBlockEnd
		}
		r.flags[p] = f
	}
	return nil
}

func (r *Ranking) reset() {
	r.keys, r.order, r.flags = r.keys[:0], r.order[:0], r.flags[:0]
}

// Len returns the number of ranked rows.
func (r *Ranking) Len() int { return len(r.order) }

// AUC returns the area under the ROC curve of the ranked scores: the
// probability that a random positive row scores above a random negative
// row, ties counting one half (the Mann–Whitney U statistic divided by
// n_pos·n_neg; equal to scikit-learn 1.2.1 roc_auc_score). Each row counts
// with its weight (nil means 1), so an integer weight w is the same as w
// copies of the row.
//
// It is NaN when the ranking is empty or when the positive or the negative
// rows have zero total weight (one class absent). Weights must be finite
// and non-negative (see CheckWeights); a NaN weight gives NaN. weights must
// have Len entries, indexed by row.
func (r *Ranking) AUC(weights []float64) float64 {
	if weights == nil {
		return r.aucUnweighted()
	}
	sameLength("Ranking.AUC", len(r.order), len(weights))
	var area, negBelow, posTotal, p, q float64
	order := r.order[:len(r.flags)]
	for i, f := range r.flags {
		w := weights[order[i]]
		pos := float64(f & flagPositive)
		p += w * pos
		q += w - w*pos
		if f&flagBlockEnd != 0 {
			area += p * (negBelow + q/2)
			negBelow += q
			posTotal += p
			p, q = 0, 0
		}
	}
	return area / (posTotal * negBelow)
}

// AUCCounts is AUC with integer weights, typically one bootstrap replicate
// of Poisson counts (a count of 0 leaves the row out). counts must have Len
// entries, indexed by row.
func (r *Ranking) AUCCounts(counts []uint8) float64 {
	sameLength("Ranking.AUCCounts", len(r.order), len(counts))
	// Counts stay exact in integers; only the area needs floating point.
	var area float64
	var negBelow, posTotal, p, q int64
	order := r.order[:len(r.flags)]
	for i, f := range r.flags {
		w := int64(counts[order[i]])
		pos := int64(f & flagPositive)
		p += w * pos
		q += w - w*pos
		if f&flagBlockEnd != 0 {
			area += float64(p) * (float64(negBelow) + float64(q)/2)
			negBelow += q
			posTotal += p
			p, q = 0, 0
		}
	}
	return area / (float64(posTotal) * float64(negBelow))
}

func (r *Ranking) aucUnweighted() float64 {
	var area float64
	var negBelow, posTotal, p, q int64
	for _, f := range r.flags {
		pos := int64(f & flagPositive)
		p += pos
		q += 1 - pos
		if f&flagBlockEnd != 0 {
			area += float64(p) * (float64(negBelow) + float64(q)/2)
			negBelow += q
			posTotal += p
			p, q = 0, 0
		}
	}
	return area / (float64(posTotal) * float64(negBelow))
}

// AUC returns the ROC AUC of scores against binary labels with optional
// weights (nil means uniform), as Ranking.AUC defines it; equal to
// scikit-learn 1.2.1 roc_auc_score with sample_weight. Empty input, one
// class absent (by weight), a NaN score or a label other than 0 and 1 give
// NaN. It allocates a Ranking; callers that repeat the computation keep
// one and call Rank and AUC instead.
func AUC(scores, labels, weights []float64) float64 {
	var r Ranking
	if err := r.Rank(scores, labels); err != nil {
		return math.NaN()
	}
	return r.AUC(weights)
}

// sortKey maps a non-NaN float64 to a uint64 with the same order: the sign
// bit is flipped for positives and every bit for negatives. −0 becomes +0
// first so that the two zeros tie as they compare equal.
func sortKey(x float64) uint64 {
	if x == 0 {
		x = 0
	}
	b := math.Float64bits(x)
	if b>>63 != 0 {
		return ^b
	}
	return b | 1<<63
}

func insertionSortKeys(keys []uint64, order []int32) {
	for i := 1; i < len(keys); i++ {
		for j := i; j > 0 && keys[j] < keys[j-1]; j-- {
			keys[j], keys[j-1] = keys[j-1], keys[j]
			order[j], order[j-1] = order[j-1], order[j]
		}
	}
}

// Radix sort digits: 6 passes of 11 bits cover the 64-bit key. Against 8
// passes of 8 bits the histograms (96 KiB) still fit in L2 and the data
// moves two fewer times.
const (
	radixBits   = 11
	radixPasses = (64 + radixBits - 1) / radixBits
	radixMask   = 1<<radixBits - 1
)

type radixCounts [radixPasses][1 << radixBits]int

// radixSortKeys sorts keys ascending, permuting order alongside, with one
// counting pass per digit (least significant first). Digits that are equal
// in every key (high exponent bits of scores in a narrow range) are
// skipped. On return *keys and *order hold the result; the tmp slices are
// scratch of the same length and may have been swapped with them. counts
// is scratch too.
func radixSortKeys(keys *[]uint64, order *[]int32, keysTmp *[]uint64, orderTmp *[]int32, counts *radixCounts) {
	src, dst := *keys, *keysTmp
	srcOrd, dstOrd := *order, *orderTmp
	n := len(src)
	dst, dstOrd, srcOrd = dst[:n], dstOrd[:n], srcOrd[:n]
	*counts = radixCounts{}
	for _, k := range src {
		for d := 0; d < radixPasses; d++ {
			counts[d][(k>>(radixBits*d))&radixMask]++
		}
	}
	for d := 0; d < radixPasses; d++ {
		c := &counts[d]
		shift := uint(radixBits * d)
		if c[(src[0]>>shift)&radixMask] == n {
			continue
		}
		var offset int
		for b := range c {
			offset, c[b] = offset+c[b], offset
		}
		for i, k := range src {
			b := (k >> shift) & radixMask
			at := c[b]
			c[b]++
			dst[at] = k
			dstOrd[at] = srcOrd[i]
		}
		src, dst = dst, src
		srcOrd, dstOrd = dstOrd, srcOrd
	}
	*keys, *keysTmp = src, dst
	*order, *orderTmp = srcOrd, dstOrd
}
