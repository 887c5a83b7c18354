package cli

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
)

// fileDigest returns the SHA-256 (hex) and size of a file, or of every
// *.parquet file below a directory (or matching a glob) in sorted order.
func fileDigest(path string) (string, int64, error) {
	files, err := inputFiles(path)
	if err != nil {
		return "", 0, err
	}
	h := sha256.New()
	var n int64
	for _, p := range files {
		f, err := os.Open(p)
		if err != nil {
			return "", 0, err
		}
		k, err := io.Copy(h, f)
		f.Close()
		if err != nil {
			return "", 0, fmt.Errorf("%s: %w", p, err)
		}
		n += k
	}
	return hex.EncodeToString(h.Sum(nil)), n, nil
}

func inputFiles(path string) ([]string, error) {
	st, err := os.Stat(path)
	if err == nil && !st.IsDir() {
		return []string{path}, nil
	}
	var files []string
	if err == nil {
		err = filepath.WalkDir(path, func(p string, d fs.DirEntry, err error) error {
			if err != nil {
				return err
			}
			if !d.IsDir() && strings.HasSuffix(p, ".parquet") && !strings.HasPrefix(d.Name(), ".") && !strings.HasPrefix(d.Name(), "_") {
				files = append(files, p)
			}
			return nil
		})
		if err != nil {
			return nil, err
		}
	} else {
		files, err = filepath.Glob(path)
		if err != nil || len(files) == 0 {
			return nil, fmt.Errorf("%s: no such file, directory or glob match", path)
		}
	}
	sort.Strings(files)
	return files, nil
}
