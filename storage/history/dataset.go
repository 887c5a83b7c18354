package history

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"
)

// partition is one run_date=YYYY-MM-DD folder.
type partition struct {
	name string    // folder name
	date time.Time // midnight UTC of the folder's date
}

// listPartitions returns the partition folders of dir sorted by date. A
// missing dir has no partitions.
func listPartitions(dir string) ([]partition, error) {
	parts, _, err := scanDataset(dir)
	return parts, err
}

// scanDataset is listPartitions that also returns the paths of the other
// visible entries of dir (neither hidden nor partition folders).
func scanDataset(dir string) (parts []partition, strays []string, err error) {
	entries, err := os.ReadDir(dir)
	if errors.Is(err, fs.ErrNotExist) {
		return nil, nil, nil
	}
	if err != nil {
		return nil, nil, fmt.Errorf("history: list dataset %s: %w", dir, err)
	}
	for _, e := range entries {
		name := e.Name()
		if isHidden(name) {
			continue
		}
		date, ok := partitionDate(name)
		if !ok || !e.IsDir() {
			strays = append(strays, filepath.Join(dir, name))
			continue
		}
		parts = append(parts, partition{name: name, date: date})
	}
	sort.Slice(parts, func(i, j int) bool { return parts[i].date.Before(parts[j].date) })
	return parts, strays, nil
}

// partitionDate parses "run_date=YYYY-MM-DD".
func partitionDate(name string) (time.Time, bool) {
	s, ok := strings.CutPrefix(name, partitionPrefix)
	if !ok {
		return time.Time{}, false
	}
	d, err := time.Parse(partitionLayout, s)
	if err != nil || d.Format(partitionLayout) != s {
		return time.Time{}, false
	}
	return d, true
}

// runFileID returns the ID in "run-<ID>.parquet".
func runFileID(name string) (string, bool) {
	s, ok := strings.CutPrefix(name, runFilePrefix)
	if !ok {
		return "", false
	}
	id, ok := strings.CutSuffix(s, runFileSuffix)
	if !ok || validateID(id) != nil {
		return "", false
	}
	return id, true
}

// isHidden follows the Hive convention: names starting with "." or "_" are
// not part of the table.
func isHidden(name string) bool {
	return strings.HasPrefix(name, ".") || strings.HasPrefix(name, "_")
}
