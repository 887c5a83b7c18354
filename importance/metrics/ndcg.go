package metrics

import (
	"fmt"
	"math"
	"slices"
)

// Gain maps a relevance grade to the gain that DCG discounts.
type Gain uint8

const (
	// GainExponential is 2^rel − 1 (Burges et al. 2005, "Learning to rank
	// using gradient descent"), the learning-to-rank convention that
	// XGBoost and LightGBM use for their ndcg metrics. It is the zero value,
	// hence the default. Relevance above 1023 overflows to +Inf.
	GainExponential Gain = iota
	// GainLinear is rel itself, which is what scikit-learn's ndcg_score
	// computes.
	GainLinear
)

// String names the gain as it appears in reports.
func (g Gain) String() string {
	switch g {
	case GainExponential:
		return "exponential"
	case GainLinear:
		return "linear"
	default:
		return fmt.Sprintf("Gain(%d)", uint8(g))
	}
}

// Of returns the gain of relevance rel. It panics on a Gain value that is
// not one of the constants.
func (g Gain) Of(rel float64) float64 {
	switch g {
	case GainExponential:
		return math.Exp2(rel) - 1
	case GainLinear:
		return rel
	default:
		panic(fmt.Sprintf("metrics: unknown %v", g))
	}
}

// NoRelevant says how a mean over query groups treats a group without any
// relevant item, whose NDCG is undefined (0/0: every ordering is ideal).
type NoRelevant uint8

const (
	// NoRelevantSkip leaves such groups out of the mean, weights included.
	// It is the default because the share of queries without a relevant
	// item is a property of the traffic, not of the model: counting them
	// as 0 (scikit-learn) or 1 (XGBoost's and LightGBM's defaults) moves
	// the mean whenever that share moves between two samples, and dilutes
	// every permutation drop by the same share.
	NoRelevantSkip NoRelevant = iota
	// NoRelevantZero counts such groups as NDCG 0, as scikit-learn 1.2.1's
	// ndcg_score does.
	NoRelevantZero
)

// String names the policy as it appears in reports.
func (p NoRelevant) String() string {
	switch p {
	case NoRelevantSkip:
		return "skip"
	case NoRelevantZero:
		return "zero"
	default:
		return fmt.Sprintf("NoRelevant(%d)", uint8(p))
	}
}

// CheckRelevance reports the first relevance grade that is negative, NaN or
// infinite, with its row (the index in labels).
func CheckRelevance(labels []float64) error {
	for i, r := range labels {
		if !(r >= 0) || math.IsInf(r, 1) {
			return fmt.Errorf("row %d: relevance %v is not a finite non-negative number: %w", i, r, ErrLabel)
		}
	}
	return nil
}

// NDCGScratch holds the buffers of one NDCG computation so repeated calls
// allocate nothing once the buffers have grown to the largest group. The
// zero value is ready to use. A scratch must not be shared by goroutines.
type NDCGScratch struct {
	items []rankedGain
	gains []float64
}

// rankedGain is one item of a query group: its score (NaN replaced by
// −Inf) and its gain.
type rankedGain struct {
	score, gain float64
}

// discountTable holds 1/log2(i+2) for 0-based positions, computed the way
// scikit-learn 1.2.1 does (1 / (ln(i+2) / ln 2)) so ranks agree to the ulp.
var discountTable = func() []float64 {
	d := make([]float64, 512)
	for i := range d {
		d[i] = discountAt(i)
	}
	return d
}()

func discountAt(i int) float64 { return 1 / (math.Log(float64(i+2)) / math.Ln2) }

// discount is the DCG weight of 0-based position i: 1/log2(i+2).
func discount(i int) float64 {
	if i < len(discountTable) {
		return discountTable[i]
	}
	return discountAt(i)
}

// NDCG returns the normalised discounted cumulative gain at k of one query
// group: DCG@k / ideal DCG@k, where DCG@k = sum over 1-based positions
// i <= k of gain_i / log2(i+1) in descending score order (Järvelin and
// Kekäläinen 2002). k <= 0 or k above the group size means every position.
//
// Ties in score are averaged over their orderings as scikit-learn 1.2.1
// does with ignore_ties=False (McSherry and Najork 2008): each item of a
// tie block gets the block's mean gain, so a block that straddles position
// k contributes the mean gain times the discounts of its positions up to k.
// A NaN score ranks as −Inf (last, tied with −Inf).
//
// The result is in [0, 1]. It is NaN for an empty group, for a group
// without an item of positive gain (see NoRelevant), and for a relevance
// that is negative or NaN (see CheckRelevance). A one-item group scores 1
// when its item is relevant: its only ordering is the ideal one, so such
// groups carry no information about the model (scikit-learn refuses them;
// padding the item with an irrelevant one scored lower gives the same 1).
//
// scratch may be nil, at the cost of allocating. scores and labels must
// have equal lengths.
func NDCG(scores, labels []float64, k int, gain Gain, scratch *NDCGScratch) float64 {
	sameLength("NDCG", len(scores), len(labels))
	if scratch == nil {
		scratch = new(NDCGScratch)
	}
	ideal := IdealDCG(labels, k, gain, scratch)
	if !(ideal > 0) {
		return math.NaN()
	}
	return DCG(scores, labels, k, gain, scratch) / ideal
}

// DCG returns the discounted cumulative gain at k of one query group with
// the tie rule of NDCG (mean gain across each tie block). k <= 0 or k above
// the group size means every position. Empty input or a negative or NaN
// relevance gives NaN. scratch may be nil, at the cost of allocating.
func DCG(scores, labels []float64, k int, gain Gain, scratch *NDCGScratch) float64 {
	sameLength("DCG", len(scores), len(labels))
	if scratch == nil {
		scratch = new(NDCGScratch)
	}
	gains, ok := gradeGains(labels, gain, scratch)
	if !ok {
		return math.NaN()
	}
	return DCGGains(scores, gains, k, scratch)
}

// gradeGains writes the gain of every relevance grade into the scratch's
// gain buffer; ok is false at the first negative or NaN grade.
func gradeGains(labels []float64, gain Gain, scratch *NDCGScratch) (gains []float64, ok bool) {
	gains = slices.Grow(scratch.gains[:0], len(labels))[:len(labels)]
	scratch.gains = gains
	for i, r := range labels {
		if !(r >= 0) {
			return nil, false
		}
		gains[i] = gain.Of(r)
	}
	return gains, true
}

// DCGGains is DCG with the gains of the items given instead of their
// relevance grades (gain.Of already applied), for callers that score one
// group many times. Gains must be non-negative and not NaN (not checked).
func DCGGains(scores, gains []float64, k int, scratch *NDCGScratch) float64 {
	sameLength("DCGGains", len(scores), len(gains))
	n := len(scores)
	if n == 0 {
		return math.NaN()
	}
	if k <= 0 || k > n {
		k = n
	}
	if scratch == nil {
		scratch = new(NDCGScratch)
	}
	if k < n {
		return dcgTop(scores, gains, k, scratch)
	}
	items := slices.Grow(scratch.items[:0], n)[:n]
	for i, s := range scores {
		items[i] = rankedGain{score: rankScore(s), gain: gains[i]}
	}
	scratch.items = items
	sortDescending(items)
	return runsDCG(items)
}

// rankScore is the score an item ranks by: NaN ranks last, as −Inf.
func rankScore(s float64) float64 {
	if s != s {
		return math.Inf(-1)
	}
	return s
}

// runsDCG is the DCG of items in descending score order at positions
// 0..len(items)-1, each run of tied scores sharing the mean gain of the run
// at each of its positions.
func runsDCG(items []rankedGain) float64 {
	var dcg float64
	for pos := 0; pos < len(items); {
		end := pos + 1
		sum := items[pos].gain
		for end < len(items) && items[end].score == items[pos].score {
			sum += items[end].gain
			end++
		}
		var d float64
		for j := pos; j < end; j++ {
			d += discount(j)
		}
		dcg += sum / float64(end-pos) * d
		pos = end
	}
	return dcg
}

// dcgTop is DCGGains for k below the number of items. Only the items
// scoring at or above the k-th largest score reach the first k positions:
// the k best are kept in order as they come, and the items tied with the
// last of them (some may have been left out) share the positions from
// theirs on, with their gains averaged.
func dcgTop(scores, gains []float64, k int, scratch *NDCGScratch) float64 {
	top := slices.Grow(scratch.items[:0], k)[:0]
	for i, s := range scores {
		s = rankScore(s)
		if len(top) == k {
			if !(s > top[k-1].score) {
				continue
			}
			top = top[:k-1]
		}
		j := len(top)
		top = append(top, rankedGain{})
		for ; j > 0 && top[j-1].score < s; j-- {
			top[j] = top[j-1]
		}
		top[j] = rankedGain{score: s, gain: gains[i]}
	}
	scratch.items = top
	cut := top[k-1].score
	// the items above the cut hold every item of their scores: whole runs
	above := 0
	for above < k && top[above].score > cut {
		above++
	}
	dcg := runsDCG(top[:above])
	tieSum, tieN := 0.0, 0
	for i, s := range scores {
		if rankScore(s) == cut {
			tieSum += gains[i]
			tieN++
		}
	}
	var d float64
	for j := above; j < k; j++ { // the tie reaches position k or beyond
		d += discount(j)
	}
	return dcg + tieSum/float64(tieN)*d
}

// IdealDCG returns the DCG at k of the best ordering of labels (gains in
// descending order). It does not depend on the scores, so a caller that
// scores the same group many times may compute it once. k <= 0 or k above
// the group size means every position. Empty input or a negative or NaN
// relevance gives NaN. scratch may be nil, at the cost of allocating.
func IdealDCG(labels []float64, k int, gain Gain, scratch *NDCGScratch) float64 {
	n := len(labels)
	if n == 0 {
		return math.NaN()
	}
	if k <= 0 || k > n {
		k = n
	}
	if scratch == nil {
		scratch = new(NDCGScratch)
	}
	gains, ok := gradeGains(labels, gain, scratch)
	if !ok {
		return math.NaN()
	}
	if n <= insertionLimit {
		for i := 1; i < n; i++ {
			for j := i; j > 0 && gains[j] > gains[j-1]; j-- {
				gains[j], gains[j-1] = gains[j-1], gains[j]
			}
		}
	} else {
		slices.Sort(gains)
		slices.Reverse(gains)
	}
	var idcg float64
	for j := 0; j < k; j++ {
		idcg += gains[j] * discount(j)
	}
	return idcg
}

// MeanNDCG returns the weighted mean of per-group NDCG values (weights nil
// means uniform; with the Poisson bootstrap the weights are the groups'
// counts). A NaN value marks a group whose NDCG is undefined: policy skips
// it (weight and all) or counts it as 0. The result is NaN for empty input
// or when no weight is left. values and weights must have equal lengths
// when weights is not nil.
func MeanNDCG(values, weights []float64, policy NoRelevant) float64 {
	if weights != nil {
		sameLength("MeanNDCG", len(values), len(weights))
	}
	if policy != NoRelevantSkip && policy != NoRelevantZero {
		panic(fmt.Sprintf("metrics: unknown %v", policy))
	}
	var s, t float64
	for i, v := range values {
		w := 1.0
		if weights != nil {
			w = weights[i]
		}
		if v != v {
			if policy == NoRelevantSkip {
				continue
			}
			v = 0
		}
		s += w * v
		t += w
	}
	if t == 0 {
		return math.NaN()
	}
	return s / t
}

// insertionLimit is the group size up to which insertion sort beats the
// general sort (typical query groups hold 10 to 50 items).
const insertionLimit = 24

// sortDescending orders items by descending score. Ties keep no particular
// order: their gains are averaged.
func sortDescending(items []rankedGain) {
	if len(items) <= insertionLimit {
		for i := 1; i < len(items); i++ {
			for j := i; j > 0 && items[j].score > items[j-1].score; j-- {
				items[j], items[j-1] = items[j-1], items[j]
			}
		}
		return
	}
	slices.SortFunc(items, func(a, b rankedGain) int {
		switch {
		case a.score > b.score:
			return -1
		case a.score < b.score:
			return 1
		default:
			return 0
		}
	})
}
