//go:build (!unix && !windows) || aix

package history

import (
	"fmt"
	"runtime"
)

// lockDataset fails: the package has no flock-style lock here (AIX offers
// only fcntl locks, which belong to the process and so do not exclude its
// own goroutines), and writing without a lock could interleave runs.
func lockDataset(path string) (unlock func() error, err error) {
	return nil, fmt.Errorf("history: lock %s: no file locking on %s", path, runtime.GOOS)
}

// syncFolder is a no-op where no lock exists either.
func syncFolder(path string) error { return nil }
