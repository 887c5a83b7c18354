package main

import (
	"bytes"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/parquet-go/parquet-go"
)

// readBack opens a converted file and returns its schema and its rows.
func readBack(t *testing.T, data []byte) (*parquet.Schema, []parquet.Row) {
	t.Helper()
	f, err := parquet.OpenFile(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		t.Fatalf("open converted file: %v", err)
	}
	var rows []parquet.Row
	for _, rg := range f.RowGroups() {
		rr := rg.Rows()
		buf := make([]parquet.Row, 16)
		for {
			n, err := rr.ReadRows(buf)
			for _, r := range buf[:n] {
				rows = append(rows, r.Clone())
			}
			if err != nil {
				break
			}
		}
		rr.Close()
	}
	return f.Schema(), rows
}

func TestConvert(t *testing.T) {
	const in = "search_id,text_match,review_score,booked\n" +
		"100001,0.25,4.5,2\n" +
		"100001,0.5,,0\n" +
		"100002, 1e-3 ,3,1\n"
	for _, dict := range []bool{false, true} {
		name := "plain"
		if dict {
			name = "dict"
		}
		t.Run(name, func(t *testing.T) {
			var out bytes.Buffer
			opts := Options{Int64: []string{"search_id"}, Int32: []string{"booked"}, Dictionary: dict}
			if err := Convert(strings.NewReader(in), &out, opts); err != nil {
				t.Fatalf("Convert: %v", err)
			}
			schema, rows := readBack(t, out.Bytes())
			// Column order and types follow the CSV header and the options
			// (Apache Parquet format specification: physical types and
			// repetition).
			wantCols := []struct {
				name     string
				kind     parquet.Kind
				optional bool
			}{
				{"search_id", parquet.Int64, false},
				{"text_match", parquet.Double, true},
				{"review_score", parquet.Double, true},
				{"booked", parquet.Int32, false},
			}
			fields := schema.Fields()
			if len(fields) != len(wantCols) {
				t.Fatalf("got %d columns, want %d", len(fields), len(wantCols))
			}
			for i, w := range wantCols {
				f := fields[i]
				if f.Name() != w.name || f.Type().Kind() != w.kind || f.Optional() != w.optional {
					t.Errorf("column %d: got %s %v optional=%v, want %s %v optional=%v",
						i, f.Name(), f.Type().Kind(), f.Optional(), w.name, w.kind, w.optional)
				}
			}
			if len(rows) != 3 {
				t.Fatalf("got %d rows, want 3", len(rows))
			}
			// Values as written in the CSV text above; NaN marks a null.
			want := [][4]float64{
				{100001, 0.25, 4.5, 2},
				{100001, 0.5, math.NaN(), 0},
				{100002, 0.001, 3, 1},
			}
			for r, row := range rows {
				got := [4]float64{}
				for _, v := range row {
					c := v.Column()
					switch {
					case v.IsNull():
						got[c] = math.NaN()
					case v.Kind() == parquet.Int64:
						got[c] = float64(v.Int64())
					case v.Kind() == parquet.Int32:
						got[c] = float64(v.Int32())
					default:
						got[c] = v.Double()
					}
				}
				for c := range got {
					same := got[c] == want[r][c] || (math.IsNaN(got[c]) && math.IsNaN(want[r][c]))
					if !same {
						t.Errorf("row %d column %d: got %v, want %v", r, c, got[c], want[r][c])
					}
				}
			}
		})
	}
}

func TestConvertErrors(t *testing.T) {
	opts := Options{Int64: []string{"search_id"}, Int32: []string{"booked"}}
	tests := []struct {
		name, in, wantSub string
	}{
		{"empty input", "", "no header"},
		{"missing int column", "search_id,x\n1,2\n", `"booked" not found`},
		{"duplicate column", "search_id,x,x,booked\n1,2,3,0\n", "appears twice"},
		{"empty column name", "search_id,,booked\n1,2,0\n", "bad name"},
		{"bad number", "search_id,x,booked\n1,abc,0\n", `line 2: column "x": number cell "abc"`},
		{"NaN cell", "search_id,x,booked\n1,NaN,0\n", "non-finite"},
		{"infinite cell", "search_id,x,booked\n1,-Inf,0\n", "non-finite"},
		{"empty integer", "search_id,x,booked\n,1,0\n", `column "search_id"`},
		{"int32 overflow", "search_id,x,booked\n1,1,3000000000\n", `column "booked"`},
		{"short row", "search_id,x,booked\n1,2,0\n1,2\n", "line 3"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var out bytes.Buffer
			err := Convert(strings.NewReader(tc.in), &out, opts)
			if err == nil {
				t.Fatalf("no error, want one containing %q", tc.wantSub)
			}
			if !strings.Contains(err.Error(), tc.wantSub) {
				t.Errorf("error %q does not contain %q", err, tc.wantSub)
			}
		})
	}
}

func TestConvertFileRemovesOutputOnError(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "bad.csv")
	out := filepath.Join(dir, "bad.parquet")
	if err := os.WriteFile(in, []byte("search_id,x,booked\n1,oops,0\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := ConvertFile(in, out, Options{Int64: []string{"search_id"}, Int32: []string{"booked"}}); err == nil {
		t.Fatal("no error for a bad cell")
	}
	if _, err := os.Stat(out); !os.IsNotExist(err) {
		t.Errorf("output left behind after an error (stat: %v)", err)
	}
}

func TestRunUsage(t *testing.T) {
	var stderr bytes.Buffer
	if code := run([]string{"only-one.csv"}, &stderr); code != 2 {
		t.Errorf("exit code %d, want 2", code)
	}
}

// FuzzConvert: any input either converts to a file that opens, or returns
// an error; it never panics.
func FuzzConvert(f *testing.F) {
	f.Add("search_id,x,booked\n1,0.5,1\n1,,0\n")
	f.Add("search_id,x,booked\n1,NaN,0\n")
	f.Add("search_id,booked\n")
	f.Add("")
	f.Fuzz(func(t *testing.T, in string) {
		var out bytes.Buffer
		opts := Options{Int64: []string{"search_id"}, Int32: []string{"booked"}, Dictionary: true}
		if err := Convert(strings.NewReader(in), &out, opts); err != nil {
			return
		}
		if _, err := parquet.OpenFile(bytes.NewReader(out.Bytes()), int64(out.Len())); err != nil {
			t.Fatalf("converted output does not open: %v", err)
		}
	})
}
