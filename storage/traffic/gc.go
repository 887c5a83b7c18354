package traffic

import (
	"runtime"
	"runtime/metrics"
)

// collector keeps decoding garbage near one row group. The frame is
// allocated first and is most of the live heap, so with the default GOGC
// the collector would let garbage (pages, dictionaries the Parquet library
// allocates per column chunk) grow to the size of the frame before a cycle:
// peak memory near twice the frame. Forcing a cycle whenever half a row
// group's worth of bytes (at least minCollectBytes) has been allocated keeps
// the peak near frame + one row group. A cycle is cheap here: the frame's
// float64 slices hold no pointers and are not scanned.
type collector struct {
	every  uint64 // bytes allocated between forced cycles
	last   uint64
	sample []metrics.Sample
}

// minCollectBytes is the least allocation between two forced cycles, so that
// small row groups do not force a cycle each (common practice; measured on
// the 1M x 30 benchmark: about a dozen forced cycles of a few ms per read).
const minCollectBytes = 16 << 20

// newCollector starts counting; rowGroupBytes is the decoded size of the
// largest row group's needed columns.
func newCollector(rowGroupBytes int64) *collector {
	c := &collector{every: uint64(max(rowGroupBytes/2, minCollectBytes))}
	c.sample = []metrics.Sample{{Name: "/gc/heap/allocs:bytes"}}
	c.last = c.allocated()
	return c
}

func (c *collector) allocated() uint64 {
	metrics.Read(c.sample)
	if c.sample[0].Value.Kind() != metrics.KindUint64 {
		return 0
	}
	return c.sample[0].Value.Uint64()
}

// maybeCollect forces a collection when enough has been allocated since the
// last one.
func (c *collector) maybeCollect() {
	now := c.allocated()
	if now-c.last < c.every {
		return
	}
	runtime.GC()
	c.last = c.allocated()
}
