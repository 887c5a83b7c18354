package history

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"time"
)

// Prune deletes the runs recorded on a UTC date before the UTC date of
// before, whole partition folder by whole partition folder: runs are kept or
// removed by the date in their folder name, with no file read, so damaged
// files age out too. It returns the run files removed, oldest first.
//
// It also deletes the hidden temporary files of writers that died (in every
// partition) and the partition folders it leaves empty; files it does not
// know are left in place, and so is their folder. Prune holds DIR/.lock like
// Append. A missing dir has nothing to prune: no error.
func Prune(dir string, before time.Time) (removed []string, err error) {
	if _, err := os.Stat(dir); errors.Is(err, fs.ErrNotExist) {
		return nil, nil
	} else if err != nil {
		return nil, fmt.Errorf("history: open dataset: %w", err)
	}
	unlock, err := lockDataset(filepath.Join(dir, lockFileName))
	if err != nil {
		return nil, err
	}
	defer func() {
		if uerr := unlock(); uerr != nil && err == nil {
			err = uerr
		}
	}()
	b := before.UTC()
	cutoff := time.Date(b.Year(), b.Month(), b.Day(), 0, 0, 0, 0, time.UTC)
	parts, err := listPartitions(dir)
	if err != nil {
		return nil, err
	}
	for _, p := range parts {
		folder := filepath.Join(dir, p.name)
		if _, err := removeOrphans(folder); err != nil {
			return removed, err
		}
		if !p.date.Before(cutoff) {
			continue
		}
		entries, err := os.ReadDir(folder)
		if err != nil {
			return removed, fmt.Errorf("history: list %s: %w", folder, err)
		}
		for _, e := range entries {
			if _, ok := runFileID(e.Name()); !ok || !e.Type().IsRegular() {
				continue
			}
			path := filepath.Join(folder, e.Name())
			if err := os.Remove(path); err != nil {
				return removed, fmt.Errorf("history: remove run file: %w", err)
			}
			removed = append(removed, path)
		}
		// Remove the folder only when nothing is left in it.
		if err := os.Remove(folder); err != nil && !isNotEmpty(folder) {
			return removed, fmt.Errorf("history: remove partition folder: %w", err)
		}
	}
	if len(removed) > 0 {
		if err := syncFolder(dir); err != nil {
			return removed, err
		}
	}
	return removed, nil
}

// isNotEmpty tells whether folder still exists with entries in it.
func isNotEmpty(folder string) bool {
	entries, err := os.ReadDir(folder)
	return err == nil && len(entries) > 0
}
