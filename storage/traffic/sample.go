package traffic

import (
	"math/rand/v2"
	"slices"
	"sort"
)

// sampleMode says which rows of the universe (the first Head rows, or all)
// the frame keeps.
type sampleMode uint8

const (
	keepAll    sampleMode = iota // every row of the universe
	keepRows                     // the sorted row indices in picked
	keepGroups                   // every row whose group id is in chosen
)

// plan is the outcome of sampling, fixed before any feature is read.
type plan struct {
	mode     sampleMode
	universe int64          // rows considered, in file order from row 0
	rows     int            // rows the frame will hold
	picked   []int64        // keepRows: global row indices, increasing
	chosen   map[int64]bool // keepGroups: group ids kept
}

// selectRows draws k of n row indices uniformly (every k-subset equally
// likely) and returns them in increasing order, in O(k) draws whatever n
// (Floyd's algorithm: Bentley & Floyd, "A sample of brilliance", CACM 30(9),
// 1987). Deterministic for a seed.
func selectRows(n int64, k int, seed uint64) []int64 {
	rng := rand.New(rand.NewPCG(seed, 0x7261666669632d73)) // second word: fixed stream id, common practice
	chosen := make(map[int64]struct{}, k)
	out := make([]int64, 0, k)
	for j := n - int64(k); j < n; j++ {
		t := rng.Int64N(j + 1)
		if _, dup := chosen[t]; dup {
			t = j
		}
		chosen[t] = struct{}{}
		out = append(out, t)
	}
	slices.Sort(out)
	return out
}

// groupCount is one query group seen while counting.
type groupCount struct {
	id    int64
	key   uint64
	count int
}

// chooseGroups keeps whole groups in the order of a pseudo-random key per
// group (Seed and id hashed with SplitMix64, Steele, Lea & Flood 2014) until
// the next group would make the total pass maxRows. The kept set is the
// prefix of a uniform random permutation of the groups, so every group is
// equally likely to be kept; at least one group is kept. Returns the ids and
// the number of rows they hold.
func chooseGroups(counts map[int64]int, maxRows int, seed uint64) (map[int64]bool, int) {
	groups := make([]groupCount, 0, len(counts))
	for id, n := range counts {
		groups = append(groups, groupCount{id: id, key: splitMix64(seed ^ splitMix64(uint64(id))), count: n})
	}
	sort.Slice(groups, func(a, b int) bool {
		if groups[a].key != groups[b].key {
			return groups[a].key < groups[b].key
		}
		return groups[a].id < groups[b].id
	})
	chosen := map[int64]bool{}
	rows := 0
	for _, g := range groups {
		if len(chosen) > 0 && rows+g.count > maxRows {
			break
		}
		chosen[g.id] = true
		rows += g.count
	}
	return chosen, rows
}

// splitMix64 is the output function of SplitMix64 (Steele, Lea & Flood,
// "Fast splittable pseudorandom number generators", OOPSLA 2014).
func splitMix64(x uint64) uint64 {
	x += 0x9e3779b97f4a7c15
	x = (x ^ (x >> 30)) * 0xbf58476d1ce4e5b9
	x = (x ^ (x >> 27)) * 0x94d049bb133111eb
	return x ^ (x >> 31)
}
