// Package demo embeds the invented demo scenario: a holiday-rental booking
// site that ranks rental listings for a traveller's search.
//
// The files are those of the planted scenario with seed 1 (made by
// testdata/planted/make_all.sh; assets/README.md tells the story):
//
//   - baseline.json.gz, candidate.json.gz: XGBoost 1.7.4 rank:pairwise models
//     (save_model JSON, gzipped), trained on the baseline and the candidate
//     week;
//   - traffic_baseline.parquet, traffic_candidate.parquet: one week of
//     serving traffic each, one row per listing shown, query column
//     search_id (INT64), graded label booked (INT32: 0 not clicked,
//     1 clicked, 2 booked), every feature an optional DOUBLE (null =
//     missing);
//   - costs.csv: the cost catalog (feature,cost_per_1k_rows,unit,group);
//   - truth.json: the planted roles, the answer key for tests.
//
// What the candidate week hides: host_response_hours arrives missing for
// 88% of rows (pipeline fault, in training data and traffic), the effect of
// distance_to_searched_place_km triples (a real model shift), photo_count
// reads 0 on every candidate traffic row (a broken join in serving), and two
// costly features, image_quality_score and traveller_host_affinity, carry no
// signal in either week. image_quality_score shares its cost group with
// photo_room_coverage, which does carry signal, so only
// traveller_host_affinity's removal saves compute. listing_age_days is used
// but has no price in the catalog. Every other feature is stable.
package demo

import (
	"embed"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
)

//go:embed assets
var assets embed.FS

// Names of the files in Files.
const (
	BaselineModel    = "baseline.json.gz"
	CandidateModel   = "candidate.json.gz"
	BaselineTraffic  = "traffic_baseline.parquet"
	CandidateTraffic = "traffic_candidate.parquet"
	Costs            = "costs.csv"
	Truth            = "truth.json"
	Readme           = "README.md"
)

// Column names of the traffic files.
const (
	// GroupColumn holds the query group: one search, 20 to 30 listings.
	GroupColumn = "search_id"
	// LabelColumn holds the graded outcome: 0 not clicked, 1 clicked,
	// 2 booked.
	LabelColumn = "booked"
)

// Files returns the demo files as a read-only file system rooted at the
// assets folder, so names are plain ("costs.csv"), never "assets/costs.csv".
func Files() fs.FS {
	sub, err := fs.Sub(assets, "assets")
	if err != nil {
		panic("demo: embedded assets folder missing: " + err.Error())
	}
	return sub
}

// Extract writes every demo file into dir, creating dir (and its parents)
// when missing, and returns the paths it wrote in lexical order of the file
// names.
//
// It never overwrites: if any target file already exists, it writes nothing
// and returns an error that wraps fs.ErrExist and names the file. A failure
// part-way removes the files this call already wrote.
func Extract(dir string) ([]string, error) {
	src := Files()
	var names []string
	err := fs.WalkDir(src, ".", func(name string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if !d.IsDir() {
			names = append(names, name)
		}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("demo: list embedded files: %w", err)
	}
	for _, name := range names {
		target := filepath.Join(dir, filepath.FromSlash(name))
		if _, err := os.Lstat(target); err == nil {
			return nil, fmt.Errorf("demo: extract to %s: %w", target, fs.ErrExist)
		} else if !errors.Is(err, fs.ErrNotExist) {
			return nil, fmt.Errorf("demo: extract to %s: %w", target, err)
		}
	}
	var written []string
	undo := func() {
		for _, p := range written {
			os.Remove(p)
		}
	}
	for _, name := range names {
		target := filepath.Join(dir, filepath.FromSlash(name))
		if err := os.MkdirAll(filepath.Dir(target), 0o755); err != nil {
			undo()
			return nil, fmt.Errorf("demo: extract to %s: %w", target, err)
		}
		data, err := fs.ReadFile(src, name)
		if err != nil {
			undo()
			return nil, fmt.Errorf("demo: read embedded %s: %w", name, err)
		}
		if err := writeNew(target, data); err != nil {
			undo()
			return nil, fmt.Errorf("demo: extract to %s: %w", target, err)
		}
		written = append(written, target)
	}
	return written, nil
}

// writeNew creates path, failing with fs.ErrExist if it exists, and writes
// data to it; on a write error the partial file is removed.
func writeNew(path string, data []byte) error {
	f, err := os.OpenFile(path, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o644)
	if err != nil {
		return err
	}
	_, werr := f.Write(data)
	cerr := f.Close()
	if werr == nil {
		werr = cerr
	}
	if werr != nil {
		os.Remove(path)
	}
	return werr
}
