// Command csv2parquet converts a traffic CSV file into a Parquet file, for the
// fixtures under testdata/ and the demo assets.
//
// Usage:
//
//	go run ./testdata/tools/csv2parquet [-int64 search_id] [-int32 booked] [-dict] in.csv out.parquet
//
// The first CSV line names the columns. Columns listed in -int64 and -int32
// become required INT64 and INT32 columns (every cell must hold an integer in
// range). Every other column becomes an optional DOUBLE column: an empty cell
// is a null; NaN and infinite values are refused, since a traffic sample
// marks a missing value by leaving the cell empty. Columns keep their CSV
// order, the file holds one row group, pages are Snappy-compressed, and with
// -dict the double columns are dictionary-encoded (much smaller when the
// values are rounded). An output that already exists is replaced; on error
// no output is left behind.
package main

import (
	"encoding/csv"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"reflect"
	"strconv"
	"strings"

	"github.com/parquet-go/parquet-go"
)

func main() {
	os.Exit(run(os.Args[1:], os.Stderr))
}

// run parses the flags, converts one file and returns the exit code: 0 on
// success, 2 on bad usage or bad input.
func run(args []string, stderr io.Writer) int {
	fs := flag.NewFlagSet("csv2parquet", flag.ContinueOnError)
	fs.SetOutput(stderr)
	int64Cols := fs.String("int64", "search_id", "comma-separated columns written as required INT64")
	int32Cols := fs.String("int32", "booked", "comma-separated columns written as required INT32")
	dict := fs.Bool("dict", false, "dictionary-encode the double columns")
	if err := fs.Parse(args); err != nil {
		return 2
	}
	if fs.NArg() != 2 {
		fmt.Fprintln(stderr, "csv2parquet: want two arguments: in.csv out.parquet")
		return 2
	}
	opts := Options{Int64: splitList(*int64Cols), Int32: splitList(*int32Cols), Dictionary: *dict}
	if err := ConvertFile(fs.Arg(0), fs.Arg(1), opts); err != nil {
		fmt.Fprintf(stderr, "csv2parquet: %v\n", err)
		return 2
	}
	return 0
}

func splitList(s string) []string {
	var out []string
	for _, f := range strings.Split(s, ",") {
		if f = strings.TrimSpace(f); f != "" {
			out = append(out, f)
		}
	}
	return out
}

// Options choose the column types. Columns named in neither list are
// optional doubles.
type Options struct {
	// Int64 names the columns written as required INT64 (query ids).
	Int64 []string
	// Int32 names the columns written as required INT32 (labels).
	Int32 []string
	// Dictionary turns on dictionary encoding for the double columns.
	Dictionary bool
}

// ConvertFile reads the CSV file in and writes the Parquet file out. On
// error the partly written output is removed.
func ConvertFile(in, out string, opts Options) (err error) {
	src, err := os.Open(in)
	if err != nil {
		return err
	}
	defer src.Close()
	dst, err := os.Create(out)
	if err != nil {
		return err
	}
	defer func() {
		if cerr := dst.Close(); err == nil && cerr != nil {
			err = fmt.Errorf("%s: %w", out, cerr)
		}
		if err != nil {
			os.Remove(out)
		}
	}()
	if err := Convert(src, dst, opts); err != nil {
		return fmt.Errorf("%s: %w", in, err)
	}
	return nil
}

// kind is a column's Parquet type.
type kind int

const (
	kindDouble kind = iota
	kindInt64
	kindInt32
)

// Convert reads CSV from r and writes Parquet to w. Errors name the line and
// column of the offending cell.
func Convert(r io.Reader, w io.Writer, opts Options) error {
	cr := csv.NewReader(r)
	cr.ReuseRecord = true
	header, err := cr.Read()
	if err != nil {
		if errors.Is(err, io.EOF) {
			return errors.New("empty input: no header line")
		}
		return fmt.Errorf("header: %w", err)
	}
	header = append([]string(nil), header...)
	kinds, err := columnKinds(header, opts)
	if err != nil {
		return err
	}
	rowType := rowStruct(header, kinds, opts.Dictionary)
	schema := parquet.SchemaOf(reflect.New(rowType).Interface())
	pw := parquet.NewWriter(w, schema,
		parquet.Compression(&parquet.Snappy),
		parquet.CreatedBy("splitledger csv2parquet", "1", ""),
	)
	row := reflect.New(rowType)
	for {
		rec, err := cr.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return err // a *csv.ParseError names the line
		}
		line, _ := cr.FieldPos(0)
		if err := fillRow(row.Elem(), rec, header, kinds); err != nil {
			return fmt.Errorf("line %d: %w", line, err)
		}
		if err := pw.Write(row.Interface()); err != nil {
			return fmt.Errorf("line %d: write: %w", line, err)
		}
	}
	if err := pw.Close(); err != nil {
		return fmt.Errorf("close parquet writer: %w", err)
	}
	return nil
}

// columnKinds checks the header and assigns each column its type.
func columnKinds(header []string, opts Options) ([]kind, error) {
	want := map[string]kind{}
	for _, n := range opts.Int64 {
		want[n] = kindInt64
	}
	for _, n := range opts.Int32 {
		if _, dup := want[n]; dup {
			return nil, fmt.Errorf("column %q listed as both int64 and int32", n)
		}
		want[n] = kindInt32
	}
	kinds := make([]kind, len(header))
	seen := map[string]bool{}
	for i, n := range header {
		if n == "" || strings.ContainsAny(n, ",\"") {
			return nil, fmt.Errorf("header: column %d has a bad name %q", i+1, n)
		}
		if seen[n] {
			return nil, fmt.Errorf("header: column %q appears twice", n)
		}
		seen[n] = true
		kinds[i] = want[n] // kindDouble when absent
	}
	for n := range want {
		if !seen[n] {
			return nil, fmt.Errorf("header: integer column %q not found", n)
		}
	}
	return kinds, nil
}

// rowStruct builds a struct type whose fields follow the CSV columns, so
// the Parquet schema keeps the CSV order (a parquet.Group would sort the
// columns by name).
func rowStruct(header []string, kinds []kind, dict bool) reflect.Type {
	fields := make([]reflect.StructField, len(header))
	for i, n := range header {
		f := reflect.StructField{Name: "C" + strconv.Itoa(i)}
		switch kinds[i] {
		case kindInt64:
			f.Type = reflect.TypeFor[int64]()
			f.Tag = reflect.StructTag(`parquet:"` + n + `"`)
		case kindInt32:
			f.Type = reflect.TypeFor[int32]()
			f.Tag = reflect.StructTag(`parquet:"` + n + `"`)
		default:
			f.Type = reflect.TypeFor[*float64]()
			tag := n + ",optional"
			if dict {
				tag += ",dict"
			}
			f.Tag = reflect.StructTag(`parquet:"` + tag + `"`)
		}
		fields[i] = f
	}
	return reflect.StructOf(fields)
}

// fillRow parses one record into row (a value of the rowStruct type).
func fillRow(row reflect.Value, rec, header []string, kinds []kind) error {
	if len(rec) != len(header) {
		return fmt.Errorf("%d cells, want %d", len(rec), len(header))
	}
	for i, cell := range rec {
		fv := row.Field(i)
		switch kinds[i] {
		case kindInt64, kindInt32:
			bits := 64
			if kinds[i] == kindInt32 {
				bits = 32
			}
			v, err := strconv.ParseInt(strings.TrimSpace(cell), 10, bits)
			if err != nil {
				return fmt.Errorf("column %q: integer cell %q: %w", header[i], cell, err)
			}
			fv.SetInt(v)
		default:
			s := strings.TrimSpace(cell)
			if s == "" {
				fv.SetZero() // nil pointer: a null
				continue
			}
			v, err := strconv.ParseFloat(s, 64)
			if err != nil {
				return fmt.Errorf("column %q: number cell %q: %w", header[i], cell, err)
			}
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("column %q: non-finite cell %q (leave the cell empty for a missing value)", header[i], cell)
			}
			fv.Set(reflect.ValueOf(&v))
		}
	}
	return nil
}
