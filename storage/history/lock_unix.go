//go:build unix && !aix

package history

import (
	"errors"
	"fmt"
	"os"
	"time"

	"golang.org/x/sys/unix"
)

// lockWait bounds how long Append and Prune wait for another writer.
const lockWait = 2 * time.Minute

// lockDataset takes an exclusive flock on path, creating the file if needed,
// and returns the function that releases it. flock belongs to the open file
// description, so it excludes other goroutines of this process as well as
// other processes, and the kernel drops it when the holder dies: a crashed
// writer leaves no stale lock.
func lockDataset(path string) (unlock func() error, err error) {
	f, err := os.OpenFile(path, os.O_RDWR|os.O_CREATE, 0o644)
	if err != nil {
		return nil, fmt.Errorf("history: open lock file: %w", err)
	}
	deadline := time.Now().Add(lockWait)
	for {
		err = unix.Flock(int(f.Fd()), unix.LOCK_EX|unix.LOCK_NB)
		if err == nil {
			break
		}
		if !errors.Is(err, unix.EWOULDBLOCK) && !errors.Is(err, unix.EINTR) {
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
		uerr := unix.Flock(int(f.Fd()), unix.LOCK_UN)
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

// syncFolder makes a rename or creation inside path durable. File systems
// that cannot sync a folder answer EINVAL; that is tolerated, since the
// rename is atomic there all the same.
func syncFolder(path string) error {
	f, err := os.Open(path)
	if err != nil {
		return fmt.Errorf("history: open folder to sync: %w", err)
	}
	serr := f.Sync()
	cerr := f.Close()
	if serr != nil && !errors.Is(serr, unix.EINVAL) {
		return fmt.Errorf("history: sync folder %s: %w", path, serr)
	}
	if cerr != nil {
		return fmt.Errorf("history: close folder %s: %w", path, cerr)
	}
	return nil
}
