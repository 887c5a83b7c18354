// Package parallel runs index ranges on a bounded pool of goroutines.
// Work is split into fixed chunks that do not depend on the worker count, so
// callers that combine per-chunk results in chunk order get identical
// results for any number of workers.
package parallel

import (
	"runtime"
	"sync"
)

// Workers returns n when positive, else the number of usable cores.
func Workers(n int) int {
	if n > 0 {
		return n
	}
	return runtime.GOMAXPROCS(0)
}

// Chunks calls fn(chunk, lo, hi) for consecutive ranges [lo, hi) of size
// chunk covering [0, n), on at most workers goroutines (<= 0: all cores).
// The chunk index is lo/size. fn must be safe to call concurrently on
// different chunks. n <= 0 calls nothing.
func Chunks(n, size, workers int, fn func(chunk, lo, hi int)) {
	if n <= 0 {
		return
	}
	if size <= 0 {
		size = 1
	}
	count := (n + size - 1) / size
	w := Workers(workers)
	if w > count {
		w = count
	}
	if w <= 1 {
		for c := 0; c < count; c++ {
			lo := c * size
			fn(c, lo, min(lo+size, n))
		}
		return
	}
	next := make(chan int, count)
	for c := 0; c < count; c++ {
		next <- c
	}
	close(next)
	var wg sync.WaitGroup
	for i := 0; i < w; i++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for c := range next {
				lo := c * size
				fn(c, lo, min(lo+size, n))
			}
		}()
	}
	wg.Wait()
}
