package bootstrap

import "fmt"

// WeightedSums writes, for every replicate b, sum_i w_bi·values_i into
// dst[b]. values holds one number per unit (a row's loss, a group's NDCG)
// and must have Units entries; dst must have Replicates entries. Dividing
// by the replicate's Total gives its weighted mean. A NaN or infinite value
// spreads to every replicate (a count of 0 times NaN is NaN), so callers
// put only defined values here. It runs on the calling goroutine; callers
// parallelise over measures, or over shards with AddWeightedSums.
func WeightedSums(values []float64, w *Weights, dst []float64) {
	if len(values) != w.n {
		panic(fmt.Sprintf("bootstrap: WeightedSums: %d values for %d units", len(values), w.n))
	}
	if len(dst) != w.replicates {
		panic(fmt.Sprintf("bootstrap: WeightedSums: dst has %d entries for %d replicates", len(dst), w.replicates))
	}
	clear(dst)
	AddWeightedSums(values, 0, w, dst)
}

// AddWeightedSums adds, for every replicate b, sum_i w_b,first+i·values_i
// to dst[b]: values covers the units [first, first+len(values)), one shard
// of the sample. Shards may be summed in any grouping (up to float
// rounding), which is what lets partial results from separate workers
// merge. dst must have Replicates entries and the range must lie within
// [0, Units).
func AddWeightedSums(values []float64, first int, w *Weights, dst []float64) {
	if len(dst) != w.replicates {
		panic(fmt.Sprintf("bootstrap: AddWeightedSums: dst has %d entries for %d replicates", len(dst), w.replicates))
	}
	if first < 0 || first+len(values) > w.n {
		panic(fmt.Sprintf("bootstrap: AddWeightedSums: units [%d, %d) outside [0, %d)", first, first+len(values), w.n))
	}
	n := w.n
	m := len(values)
	b := 0
	// Four replicates at a time: each value is loaded once for four
	// independent accumulators, which keeps the floating-point pipeline
	// busy and reads values B/4 times instead of B times.
	for ; b+4 <= w.replicates; b += 4 {
		r0 := w.counts[b*n+first : b*n+first+m]
		r1 := w.counts[(b+1)*n+first : (b+1)*n+first+m]
		r2 := w.counts[(b+2)*n+first : (b+2)*n+first+m]
		r3 := w.counts[(b+3)*n+first : (b+3)*n+first+m]
		var s0, s1, s2, s3 float64
		for i, v := range values {
			s0 += float64(r0[i]) * v
			s1 += float64(r1[i]) * v
			s2 += float64(r2[i]) * v
			s3 += float64(r3[i]) * v
		}
		dst[b] += s0
		dst[b+1] += s1
		dst[b+2] += s2
		dst[b+3] += s3
	}
	for ; b < w.replicates; b++ {
		r := w.counts[b*n+first : b*n+first+m]
		var s float64
		for i, v := range values {
			s += float64(r[i]) * v
		}
		dst[b] += s
	}
}

// AddTotals adds, for every replicate b, the counts of units [first, last)
// to dst[b]: the replicate's weight total over a shard, or over a subset
// of contiguous units. dst must have Replicates entries.
func AddTotals(w *Weights, first, last int, dst []float64) {
	if len(dst) != w.replicates {
		panic(fmt.Sprintf("bootstrap: AddTotals: dst has %d entries for %d replicates", len(dst), w.replicates))
	}
	if first < 0 || last < first || last > w.n {
		panic(fmt.Sprintf("bootstrap: AddTotals: units [%d, %d) outside [0, %d)", first, last, w.n))
	}
	for b := 0; b < w.replicates; b++ {
		var s int
		for _, c := range w.counts[b*w.n+first : b*w.n+last] {
			s += int(c)
		}
		dst[b] += float64(s)
	}
}
