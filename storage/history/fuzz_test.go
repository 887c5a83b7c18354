package history

import (
	"bytes"
	"os"
	"runtime"
	"testing"
)

// maxDecodeAlloc bounds what decoding one damaged file may allocate; the
// seeds in testdata/fuzz/FuzzDecodeRun once made the Parquet reader ask for
// 256 to 714 MB (a footer list length, a page statistics length, an RLE run
// length), which checkFooter and checkPages now refuse.
const maxDecodeAlloc = 64 << 20

// FuzzDecodeRun feeds damaged run files to the reader: it must return an
// error or a run that passes the data model and survives another round trip,
// never panic, and never allocate more than maxDecodeAlloc. Seeds are real
// run files and cut copies of them.
func FuzzDecodeRun(f *testing.F) {
	dir := f.TempDir()
	for i, run := range []Run{sampleRun(0), {ID: "empty", Time: sampleRun(1).Time, Verdict: VerdictPass}} {
		path, err := Append(dir, run)
		if err != nil {
			f.Fatal(err)
		}
		data, err := os.ReadFile(path)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
		if i == 0 {
			f.Add(data[:len(data)/3])
			f.Add(data[len(data)-64:])
		}
	}
	f.Add([]byte("PAR1PAR1"))
	f.Fuzz(func(t *testing.T, data []byte) {
		var before, after runtime.MemStats
		runtime.ReadMemStats(&before)
		run, err := decodeRun(bytes.NewReader(data), int64(len(data)))
		runtime.ReadMemStats(&after)
		if a := after.TotalAlloc - before.TotalAlloc; a > maxDecodeAlloc {
			t.Fatalf("decoding %d bytes allocated %d MB", len(data), a>>20)
		}
		if err != nil {
			return
		}
		var buf bytes.Buffer
		if err := writeRun(&buf, &run); err != nil {
			t.Fatalf("decoded run does not encode again: %v", err)
		}
		again, err := decodeRun(bytes.NewReader(buf.Bytes()), int64(buf.Len()))
		if err != nil {
			t.Fatalf("re-encoded run does not decode: %v", err)
		}
		if d := diffRun(run, again); d != "" {
			t.Fatalf("second round trip differs: %s", d)
		}
	})
}
