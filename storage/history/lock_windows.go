//go:build windows

package history

import (
	"errors"
	"fmt"
	"os"
	"time"

	"golang.org/x/sys/windows"
)

// lockWait bounds how long Append and Prune wait for another writer.
const lockWait = 2 * time.Minute

// lockDataset takes an exclusive LockFileEx lock on the first byte of path,
// creating the file if needed, and returns the function that releases it.
// Windows drops the lock when the holding process dies.
func lockDataset(path string) (unlock func() error, err error) {
	f, err := os.OpenFile(path, os.O_RDWR|os.O_CREATE, 0o644)
	if err != nil {
		return nil, fmt.Errorf("history: open lock file: %w", err)
	}
	h := windows.Handle(f.Fd())
	deadline := time.Now().Add(lockWait)
	for {
		ol := new(windows.Overlapped)
		err = windows.LockFileEx(h, windows.LOCKFILE_EXCLUSIVE_LOCK|windows.LOCKFILE_FAIL_IMMEDIATELY, 0, 1, 0, ol)
		if err == nil {
			break
		}
		if !errors.Is(err, windows.ERROR_LOCK_VIOLATION) {
			f.Close()
			return nil, fmt.Errorf("history: lock %s: %w", path, err)
		}
		if time.Now().After(deadline) {
			f.Close()
			return nil, fmt.Errorf("history: lock %s still held by another writer after %v: %w", path, lockWait, err)
		}
		time.Sleep(10 * time.Millisecond)
	}
	return func() error {
		uerr := windows.UnlockFileEx(h, 0, 1, 0, new(windows.Overlapped))
		cerr := f.Close()
		if uerr != nil {
			return fmt.Errorf("history: unlock %s: %w", path, uerr)
		}
		if cerr != nil {
			return fmt.Errorf("history: close lock file %s: %w", path, cerr)
		}
		return nil
	}, nil
}

// syncFolder is a no-op: Windows offers no handle on a folder to flush, and
// its rename (MoveFileEx with replace) is already atomic.
func syncFolder(path string) error { return nil }
