package traffic

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
)

// resolvePaths turns a file, a directory or a glob into a sorted list of
// Parquet files. A directory contributes every regular *.parquet file below
// it; names starting with "." or "_" (hidden files, job markers and
// temporary folders of Hive-style writers; common practice) are skipped. A
// glob keeps every file it matches whatever its extension, and expands the
// directories it matches like a directory argument.
func resolvePaths(path string) ([]string, error) {
	if path == "" {
		return nil, fmt.Errorf("traffic: %w: empty path", ErrNoFiles)
	}
	info, err := os.Stat(path)
	switch {
	case err == nil && info.IsDir():
		files, err := walkParquet(path)
		if err != nil {
			return nil, err
		}
		if len(files) == 0 {
			return nil, fmt.Errorf("traffic: %s: %w (no *.parquet file below the directory)", path, ErrNoFiles)
		}
		return files, nil
	case err == nil:
		return []string{path}, nil
	case errors.Is(err, fs.ErrNotExist) && strings.ContainsAny(path, "*?["):
		return globParquet(path)
	default:
		return nil, fmt.Errorf("traffic: %w", err)
	}
}

func walkParquet(dir string) ([]string, error) {
	var files []string
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if p != dir && skippedName(d.Name()) {
			if d.IsDir() {
				return filepath.SkipDir
			}
			return nil
		}
		if d.Type().IsRegular() && strings.HasSuffix(d.Name(), ".parquet") {
			files = append(files, p)
		}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("traffic: listing %s: %w", dir, err)
	}
	sort.Strings(files)
	return files, nil
}

func skippedName(name string) bool {
	return strings.HasPrefix(name, ".") || strings.HasPrefix(name, "_")
}

func globParquet(pattern string) ([]string, error) {
	matches, err := filepath.Glob(pattern)
	if err != nil {
		return nil, fmt.Errorf("traffic: glob %q: %w", pattern, err)
	}
	var files []string
	for _, m := range matches {
		info, err := os.Stat(m)
		if err != nil {
			return nil, fmt.Errorf("traffic: %w", err)
		}
		if info.IsDir() {
			below, err := walkParquet(m)
			if err != nil {
				return nil, err
			}
			files = append(files, below...)
			continue
		}
		if info.Mode().IsRegular() {
			files = append(files, m)
		}
	}
	sort.Strings(files)
	files = dedupSorted(files)
	if len(files) == 0 {
		return nil, fmt.Errorf("traffic: %s: %w (the pattern matches no file)", pattern, ErrNoFiles)
	}
	return files, nil
}

func dedupSorted(s []string) []string {
	out := s[:0]
	for i, x := range s {
		if i == 0 || x != s[i-1] {
			out = append(out, x)
		}
	}
	return out
}
