//go:build !linux

package traffic

// physicalMemory returns 0 (unknown) outside Linux: no memory check.
func physicalMemory() int64 { return 0 }
