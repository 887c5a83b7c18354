package parallel

import (
	"sync/atomic"
	"testing"
)

// Every index is covered exactly once, chunk boundaries do not depend on
// the worker count, and n <= 0 calls nothing.
func TestChunks(t *testing.T) {
	for _, tc := range []struct{ n, size, workers int }{
		{0, 4, 2}, {1, 4, 2}, {10, 3, 1}, {10, 3, 2}, {10, 3, 8}, {100, 1, 3}, {7, 0, 2},
	} {
		seen := make([]int32, max(tc.n, 0))
		var calls atomic.Int32
		size := max(tc.size, 1)
		Chunks(tc.n, tc.size, tc.workers, func(chunk, lo, hi int) {
			calls.Add(1)
			if lo != chunk*size || hi > tc.n || hi <= lo {
				t.Errorf("n=%d size=%d: chunk %d = [%d, %d)", tc.n, tc.size, chunk, lo, hi)
			}
			for i := lo; i < hi; i++ {
				atomic.AddInt32(&seen[i], 1)
			}
		})
		for i, s := range seen {
			if s != 1 {
				t.Fatalf("n=%d: index %d seen %d times", tc.n, i, s)
			}
		}
		if want := (tc.n + size - 1) / size; int(calls.Load()) != max(want, 0) {
			t.Errorf("n=%d size=%d: %d calls, want %d", tc.n, tc.size, calls.Load(), want)
		}
	}
	if Workers(3) != 3 || Workers(0) < 1 {
		t.Error("Workers")
	}
}
