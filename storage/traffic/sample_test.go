package traffic

import (
	"fmt"
	"math"
	"path/filepath"
	"testing"

	"github.com/apache/arrow-go/v18/parquet/compress"
)

// writeSampleParts writes an invented sample as two files with several row
// groups each and returns the folder and the concatenated sample.
func writeSampleParts(t *testing.T) (string, sample) {
	t.Helper()
	dir := t.TempDir()
	a, b := makeSample(700, 31), makeSample(500, 32)
	// The second file's row ids and query ids continue the first's.
	for i := range b.group {
		b.group[i] += 1_000_000
		b.cols[1].values.([]int64)[i] += int64(a.rows)
		b.want["photo_count"][i] += float64(a.rows)
	}
	writeParquet(t, filepath.Join(dir, "part-0.parquet"), a.cols, layout{codec: compress.Codecs.Snappy, rowGroupRows: 128})
	writeParquet(t, filepath.Join(dir, "part-1.parquet"), b.cols, layout{codec: compress.Codecs.Zstd, pageV2: true, rowGroupRows: 200})
	all := sample{want: map[string][]float64{}, rows: a.rows + b.rows}
	for _, s := range []sample{a, b} {
		for _, name := range modelFeatures {
			all.want[name] = append(all.want[name], s.want[name]...)
		}
		all.label = append(all.label, s.label...)
		all.weight = append(all.weight, s.weight...)
		all.group = append(all.group, s.group...)
	}
	return dir, all
}

// keptRows recovers the source row of every frame row from photo_count,
// which holds the row id, and checks that rows stay in file order.
func keptRows(t *testing.T, photo []float64) []int {
	t.Helper()
	out := make([]int, len(photo))
	for k := range out {
		out[k] = int(photo[k])
		if k > 0 && out[k] <= out[k-1] {
			t.Fatalf("rows out of file order: %d after %d", out[k], out[k-1])
		}
	}
	return out
}

func TestReadHead(t *testing.T) {
	dir, s := writeSampleParts(t)
	for _, head := range []int{1, 37, 128, 700, 777, 1200, 5000} {
		t.Run(fmt.Sprint(head), func(t *testing.T) {
			opts := sampleOptions()
			opts.Head = head
			f, err := Read(dir, opts)
			if err != nil {
				t.Fatal(err)
			}
			n := min(head, s.rows)
			rows := make([]int, n)
			for i := range rows {
				rows[i] = i
			}
			checkFrame(t, f, s, rows)
			// SampleFraction = Rows / TotalRows (package doc).
			if f.TotalRows != int64(s.rows) || f.SampleFraction != float64(n)/float64(s.rows) {
				t.Errorf("TotalRows %d SampleFraction %v, want %d %v", f.TotalRows, f.SampleFraction, s.rows, float64(n)/float64(s.rows))
			}
		})
	}
}

func TestReadMaxRowsWithoutGroups(t *testing.T) {
	dir, s := writeSampleParts(t)
	read := func(maxRows, head int, seed uint64) []int {
		opts := sampleOptions()
		opts.Group = ""
		opts.MaxRows, opts.Head, opts.Seed = maxRows, head, seed
		f, err := Read(dir, opts)
		if err != nil {
			t.Fatal(err)
		}
		universe := s.rows
		if head > 0 {
			universe = min(head, s.rows)
		}
		want := min(maxRows, universe)
		if f.Rows != want {
			t.Fatalf("Rows = %d, want %d", f.Rows, want)
		}
		if f.SampleFraction != float64(want)/float64(s.rows) {
			t.Errorf("SampleFraction = %v, want %v", f.SampleFraction, float64(want)/float64(s.rows))
		}
		rows := keptRows(t, f.Columns[1])
		checkFrame(t, f, s, rows)
		if rows[len(rows)-1] >= universe {
			t.Fatalf("row %d kept outside the first %d rows", rows[len(rows)-1], universe)
		}
		return rows
	}
	a := read(250, 0, 1)
	b := read(250, 0, 1)
	c := read(250, 0, 2)
	if fmt.Sprint(a) != fmt.Sprint(b) {
		t.Error("same seed, different rows")
	}
	if fmt.Sprint(a) == fmt.Sprint(c) {
		t.Error("seeds 1 and 2 kept the same rows")
	}
	read(100, 300, 9)
	read(5000, 0, 9) // more than there is: every row
}

func TestReadMaxRowsKeepsWholeGroups(t *testing.T) {
	dir, s := writeSampleParts(t)
	size := map[int64]int{}
	for _, g := range s.group {
		size[g]++
	}
	read := func(maxRows, head int, seed uint64) []int64 {
		opts := sampleOptions()
		opts.MaxRows, opts.Head, opts.Seed = maxRows, head, seed
		f, err := Read(dir, opts)
		if err != nil {
			t.Fatal(err)
		}
		if f.Rows > maxRows || f.Rows < maxRows-12 { // groups hold at most 12 rows
			t.Fatalf("Rows = %d for MaxRows %d", f.Rows, maxRows)
		}
		if f.SampleFraction != float64(f.Rows)/float64(s.rows) {
			t.Errorf("SampleFraction = %v, want %v", f.SampleFraction, float64(f.Rows)/float64(s.rows))
		}
		rows := keptRows(t, f.Columns[1])
		checkFrame(t, f, s, rows)
		got := map[int64]int{}
		var ids []int64
		for _, g := range f.Group {
			if got[g] == 0 {
				ids = append(ids, g)
			}
			got[g]++
		}
		for g, n := range got {
			want := size[g]
			if head > 0 { // a group cut by the head keeps the rows before the cut
				want = 0
				for _, x := range s.group[:head] {
					if x == g {
						want++
					}
				}
			}
			if n != want {
				t.Fatalf("group %d: %d rows kept of %d", g, n, want)
			}
		}
		return ids
	}
	a := read(300, 0, 5)
	b := read(300, 0, 5)
	c := read(300, 0, 6)
	if fmt.Sprint(a) != fmt.Sprint(b) {
		t.Error("same seed, different groups")
	}
	if fmt.Sprint(a) == fmt.Sprint(c) {
		t.Error("seeds 5 and 6 kept the same groups")
	}
	read(100, 400, 5)
}

// TestSelectRowsUniform: Floyd's algorithm keeps every row with probability
// k/n (Bentley & Floyd, CACM 1987). 20000 draws of 3 of 10 rows: each row's
// count is Binomial(20000, 0.3), sd ~ 65; 5 sd is a bound that a correct
// sampler passes with overwhelming probability (common practice).
func TestSelectRowsUniform(t *testing.T) {
	const n, k, draws = 10, 3, 20000
	counts := make([]int, n)
	for seed := uint64(0); seed < draws; seed++ {
		rows := selectRows(n, k, seed)
		if len(rows) != k {
			t.Fatalf("seed %d: %d rows, want %d", seed, len(rows), k)
		}
		for i, r := range rows {
			if i > 0 && r <= rows[i-1] {
				t.Fatalf("seed %d: rows %v not increasing", seed, rows)
			}
			counts[r]++
		}
	}
	mean := float64(draws) * k / n
	sd := math.Sqrt(float64(draws) * 0.3 * 0.7)
	for r, c := range counts {
		if !(math.Abs(float64(c)-mean) <= 5*sd) {
			t.Errorf("row %d kept %d times, want %.0f ± %.0f", r, c, mean, 5*sd)
		}
	}
}

// TestChooseGroupsUniform: with equal group sizes every group is equally
// likely to be kept (random-key sampling; same binomial bound as above).
func TestChooseGroupsUniform(t *testing.T) {
	counts := map[int64]int{}
	for id := int64(0); id < 10; id++ {
		counts[id*7919] = 4
	}
	const draws = 20000
	kept := map[int64]int{}
	for seed := uint64(0); seed < draws; seed++ {
		chosen, rows := chooseGroups(counts, 13, seed) // room for 3 groups of 4
		if len(chosen) != 3 || rows != 12 {
			t.Fatalf("seed %d: %d groups, %d rows; want 3, 12", seed, len(chosen), rows)
		}
		for id := range chosen {
			kept[id]++
		}
	}
	mean := float64(draws) * 0.3
	sd := math.Sqrt(float64(draws) * 0.3 * 0.7)
	for id := range counts {
		if !(math.Abs(float64(kept[id])-mean) <= 5*sd) {
			t.Errorf("group %d kept %d times, want %.0f ± %.0f", id, kept[id], mean, 5*sd)
		}
	}
}

func TestChooseGroupsKeepsOneOversizedGroup(t *testing.T) {
	chosen, rows := chooseGroups(map[int64]int{1: 50, 2: 60}, 10, 3)
	if len(chosen) != 1 || (rows != 50 && rows != 60) {
		t.Errorf("chosen %v with %d rows, want one whole group", chosen, rows)
	}
}
