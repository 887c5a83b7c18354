package history

import (
	"errors"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"testing"
	"time"
)

// The crash and concurrency tests re-run this test binary as a child
// process; these variables tell the child what to do.
const (
	childRoleEnv = "HISTORY_TEST_CHILD_ROLE" // "crash" or "writer"
	childDirEnv  = "HISTORY_TEST_CHILD_DIR"
	childArgEnv  = "HISTORY_TEST_CHILD_ARG"
)

// TestChildProcess is the body of the child processes; run directly it
// does nothing.
func TestChildProcess(t *testing.T) {
	role := os.Getenv(childRoleEnv)
	if role == "" {
		t.Skip("only runs as a child of TestCrashMidWrite and TestConcurrentWriters")
	}
	dir := os.Getenv(childDirEnv)
	arg := os.Getenv(childArgEnv)
	switch role {
	case "crash":
		// Write the first bytes of the run, announce it, and hang until killed.
		run := sampleRun(5)
		_, err := appendRun(dir, run, func(w io.Writer) io.Writer {
			return &stallingWriter{w: w, ready: filepath.Join(dir, "_child_stalled")}
		})
		t.Fatalf("appendRun returned %v; it should have hung until killed", err)
	case "writer":
		// Wait for the start signal, then append 20 runs as fast as possible.
		k, _ := strconv.Atoi(arg)
		for !exists(filepath.Join(dir, "_start")) {
			time.Sleep(time.Millisecond)
		}
		base := sampleRun(k)
		for i := 0; i < 20; i++ {
			run := base
			run.ID = fmt.Sprintf("writer%d-%02d", k, i)
			run.Time = base.Time.Add(time.Duration(i) * time.Second)
			if _, err := Append(dir, run); err != nil {
				t.Fatalf("writer %d, run %d: %v", k, i, err)
			}
		}
	default:
		t.Fatalf("unknown child role %q", role)
	}
}

// stallingWriter passes the file's first two writes through (the magic
// number, then the first data), then signals and blocks: the process dies
// with a partly written file.
type stallingWriter struct {
	w     io.Writer
	ready string
	calls int
	wrote int
}

func (s *stallingWriter) Write(p []byte) (int, error) {
	n, err := s.w.Write(p)
	s.wrote += n
	s.calls++
	if s.calls >= 2 {
		if f, ok := s.w.(*os.File); ok {
			f.Sync() // the partial bytes really are on disk when we are killed
		}
		os.WriteFile(s.ready, []byte(strconv.Itoa(s.wrote)), 0o644)
		select {} // hang: the parent kills this process
	}
	return n, err
}

func exists(path string) bool {
	_, err := os.Stat(path)
	return err == nil
}

func childCommand(t *testing.T, role, dir, arg string) *exec.Cmd {
	t.Helper()
	if runtime.GOOS == "js" || runtime.GOOS == "wasip1" {
		t.Skip("no child processes here")
	}
	cmd := exec.Command(os.Args[0], "-test.run=^TestChildProcess$", "-test.count=1")
	cmd.Env = append(os.Environ(), childRoleEnv+"="+role, childDirEnv+"="+dir, childArgEnv+"="+arg)
	return cmd
}

func waitFor(t *testing.T, path string, limit time.Duration) {
	t.Helper()
	deadline := time.Now().Add(limit)
	for !exists(path) {
		if time.Now().After(deadline) {
			t.Fatalf("%s did not appear within %v", path, limit)
		}
		time.Sleep(5 * time.Millisecond)
	}
}

// A writer killed mid-write (SIGKILL on Unix: no cleanup runs) leaves the
// dataset readable with every earlier run, no visible partial file, and no
// stale lock.
func TestCrashMidWrite(t *testing.T) {
	dir := t.TempDir()
	earlier := []Run{sampleRun(0), sampleRun(1), sampleRun(2)}
	for _, r := range earlier {
		mustAppend(t, dir, r)
	}
	before := visibleFiles(t, dir)

	child := childCommand(t, "crash", dir, "")
	child.Stderr = os.Stderr
	if err := child.Start(); err != nil {
		t.Fatal(err)
	}
	waitFor(t, filepath.Join(dir, "_child_stalled"), time.Minute)

	// Readers see nothing of the write in progress.
	if got := mustLoad(t, dir); len(got) != len(earlier) {
		t.Errorf("during the write Load gave %d runs, want %d", len(got), len(earlier))
	}
	if err := child.Process.Kill(); err != nil {
		t.Fatal(err)
	}
	child.Wait()

	partial, _ := filepath.Glob(filepath.Join(dir, "*", ".run-*.tmp"))
	if len(partial) != 1 {
		t.Fatalf("orphaned temporary files %q, want exactly one", partial)
	}
	// The child died past the magic number, in the middle of the data.
	if info, err := os.Stat(partial[0]); err != nil {
		t.Error(err)
	} else if info.Size() <= 4 {
		t.Errorf("orphan %s has %d bytes, want a partly written file", partial[0], info.Size())
	} else {
		t.Logf("killed with %d bytes written", info.Size())
	}
	if after := visibleFiles(t, dir); !slices.Equal(after, before) {
		t.Errorf("visible files after the crash %q, want %q", after, before)
	}
	got := mustLoad(t, dir)
	if len(got) != len(earlier) {
		t.Fatalf("after the crash Load gave %d runs, want %d", len(got), len(earlier))
	}
	for i := range earlier {
		if d := diffRun(earlier[i], got[i]); d != "" {
			t.Errorf("run %d: %s", i, d)
		}
	}

	// The kernel released the dead writer's lock: the same run can be
	// appended now, and that Append clears the orphan of its partition.
	done := make(chan error, 1)
	go func() { _, err := Append(dir, sampleRun(5)); done <- err }()
	select {
	case err := <-done:
		if err != nil {
			t.Fatal(err)
		}
	case <-time.After(time.Minute):
		t.Fatal("Append still waiting for the dead writer's lock")
	}
	if left, _ := filepath.Glob(filepath.Join(dir, "*", ".run-*.tmp")); len(left) != 0 {
		t.Errorf("orphans left after the next Append: %q", left)
	}
	if got := mustLoad(t, dir); len(got) != len(earlier)+1 {
		t.Errorf("Load gave %d runs, want %d", len(got), len(earlier)+1)
	}
}

// Two processes appending at once both land: 40 runs, none lost, none
// damaged, all in one partition folder so their writes meet.
func TestConcurrentWriters(t *testing.T) {
	dir := t.TempDir()
	var children []*exec.Cmd
	for k := 0; k < 2; k++ {
		c := childCommand(t, "writer", dir, strconv.Itoa(k))
		c.Stderr = os.Stderr
		if err := c.Start(); err != nil {
			t.Fatal(err)
		}
		children = append(children, c)
	}
	if err := os.WriteFile(filepath.Join(dir, "_start"), nil, 0o644); err != nil {
		t.Fatal(err)
	}
	for k, c := range children {
		if err := c.Wait(); err != nil {
			var exit *exec.ExitError
			errors.As(err, &exit)
			t.Fatalf("writer %d: %v", k, err)
		}
	}
	got := mustLoad(t, dir)
	var ids []string
	for _, r := range got {
		ids = append(ids, r.ID)
	}
	slices.Sort(ids)
	var want []string
	for k := 0; k < 2; k++ {
		for i := 0; i < 20; i++ {
			want = append(want, fmt.Sprintf("writer%d-%02d", k, i))
		}
	}
	if !slices.Equal(ids, want) {
		t.Fatalf("loaded IDs %q, want %q", ids, want)
	}
	for _, r := range got {
		if len(r.Rows) != len(sampleRun(0).Rows) {
			t.Errorf("run %s has %d rows", r.ID, len(r.Rows))
		}
	}
}

// Goroutines of one process are kept apart by the same lock (flock belongs
// to the open file description, not to the process).
func TestConcurrentGoroutines(t *testing.T) {
	dir := t.TempDir()
	errs := make(chan error, 8)
	for g := 0; g < 8; g++ {
		go func() {
			run := sampleRun(g % 3)
			run.ID = fmt.Sprintf("goroutine-%d", g)
			_, err := Append(dir, run)
			errs <- err
		}()
	}
	for g := 0; g < 8; g++ {
		if err := <-errs; err != nil {
			t.Error(err)
		}
	}
	if got := mustLoad(t, dir); len(got) != 8 {
		t.Errorf("Load gave %d runs, want 8", len(got))
	}
}
