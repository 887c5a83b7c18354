package traffic

import (
	"errors"
	"fmt"
)

// ErrTooLarge: the frame (or one row group) would not fit in memory; read
// fewer rows with Options.Head or Options.MaxRows.
var ErrTooLarge = errors.New("traffic sample too large for memory")

// memoryShare is the share of the machine's memory the frame and the
// decoding buffers may take (common practice: leave room for the rest of
// the run).
const memoryShare = 0.75

// checkMemory refuses, before allocating, a frame of rows rows and columns
// float64 columns plus per-worker row-group buffers of rowGroup rows that
// would exceed memoryShare of physical memory. Footers are untrusted: a
// damaged one can claim any row count, and preallocating from it must not
// crash the process. It does nothing where the memory size is unknown.
func checkMemory(source string, rows int64, columns int, rowGroup int64, workers int) error {
	limit := float64(physicalMemory()) * memoryShare
	if limit <= 0 {
		return nil
	}
	frame := float64(rows) * float64(columns) * 8
	buffers := float64(rowGroup) * 8 * float64(workers+2)
	if frame+buffers <= limit {
		return nil
	}
	return fmt.Errorf("traffic: %s: %w: %d rows x %d columns need %.1f GB (row groups of %d rows %.1f GB more), more than %.0f%% of this machine's %.1f GB; use a head or max-rows limit",
		source, ErrTooLarge, rows, columns, frame/1e9, rowGroup, buffers/1e9, memoryShare*100, limit/memoryShare/1e9)
}
