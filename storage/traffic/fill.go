package traffic

import (
	"errors"
	"fmt"
	"sync"

	"splitledger/importance/frame"
	"splitledger/importance/parallel"
)

// reader holds what the footers told and the state shared by the passes.
type reader struct {
	src     *sources
	targets []target
	workers int
	coder   *groupCoder // string group ids -> codes, used in row order only
}

// groupTarget returns the index of the group target, -1 without one.
func (r *reader) groupTarget() int {
	for i := range r.targets {
		if r.targets[i].role == roleGroup {
			return i
		}
	}
	return -1
}

// plan fixes the rows to keep. Group sampling needs one pass over the group
// column first, to count the rows of every group.
func (r *reader) plan(opts Options) (*plan, error) {
	universe := r.src.totalRows
	if opts.Head > 0 && int64(opts.Head) < universe {
		universe = int64(opts.Head)
	}
	p := &plan{mode: keepAll, universe: universe, rows: int(universe)}
	if opts.MaxRows <= 0 || universe <= int64(opts.MaxRows) {
		return p, nil
	}
	if r.groupTarget() < 0 {
		p.mode = keepRows
		p.picked = selectRows(universe, opts.MaxRows, opts.Seed)
		p.rows = len(p.picked)
		return p, nil
	}
	counts, err := r.countGroups(universe)
	if err != nil {
		return nil, err
	}
	p.mode = keepGroups
	p.chosen, p.rows = chooseGroups(counts, opts.MaxRows, opts.Seed)
	return p, nil
}

func (r *reader) countGroups(universe int64) (map[int64]int, error) {
	counts := map[int64]int{}
	var ids []int64
	err := r.eachRowGroup(universe, func(ref *rowGroupRef) error {
		ids = growInt64(ids, ref.n)
		if err := r.decodeGroupColumn(ref, ids); err != nil {
			return err
		}
		for _, id := range ids[:ref.m] {
			counts[id]++
		}
		return nil
	})
	return counts, err
}

// rowGroupRef is one row group of the universe.
type rowGroupRef struct {
	file      *openFile
	info      *fileInfo
	index     int   // row group index in the file
	start     int64 // global index of the row group's first row
	fileStart int64 // index of its first row within the file
	n         int   // rows in the row group
	m         int   // rows of it inside the universe (a prefix)
}

// eachRowGroup opens the files in order, one at a time, and calls fn for
// every row group that starts inside the universe.
func (r *reader) eachRowGroup(universe int64, fn func(*rowGroupRef) error) error {
	var start int64
	for fi := range r.src.files {
		if start >= universe {
			return nil
		}
		info := &r.src.files[fi]
		f, err := openParquet(info.path)
		if err != nil {
			return err
		}
		err = func() error {
			defer f.Close()
			if !sameLayout(f, info) {
				return fmt.Errorf("traffic: %s: %w: the file changed while it was read", info.path, ErrDamaged)
			}
			var fileStart int64
			for g, n := range info.rowGroups {
				if start >= universe {
					return nil
				}
				m := min(n, universe-start)
				if m > 0 {
					ref := &rowGroupRef{file: f, info: info, index: g, start: start, fileStart: fileStart, n: int(n), m: int(m)}
					if err := fn(ref); err != nil {
						return err
					}
				}
				start += n
				fileStart += n
			}
			return nil
		}()
		if err != nil {
			return err
		}
	}
	return nil
}

func sameLayout(f *openFile, info *fileInfo) bool {
	if len(f.meta.RowGroups) != len(info.rowGroups) || len(f.pq.RowGroups()) != len(info.rowGroups) {
		return false
	}
	for g := range info.rowGroups {
		if f.meta.RowGroups[g].NumRows != info.rowGroups[g] {
			return false
		}
	}
	return true
}

// decodeGroupColumn reads the group column of a row group into dst[:n].
func (r *reader) decodeGroupColumn(ref *rowGroupRef, dst []int64) error {
	gt := r.groupTarget()
	t := &r.targets[gt]
	col := ref.info.columns[gt]
	err := decodeGroups(r.chunk(ref, col.leaf), col, r.coder, dst[:ref.n])
	var null *nullGroupError
	if errors.As(err, &null) {
		return fmt.Errorf("traffic: %s: %s: row %d (counting from 0): %w", ref.info.path, t.describe(), ref.fileStart+int64(null.pos), ErrNullGroup)
	}
	if err != nil {
		return fmt.Errorf("traffic: %s: %s: row group %d: %w", ref.info.path, t.describe(), ref.index, err)
	}
	return nil
}

// fill reads the kept rows of every needed column into the preallocated
// frame. Row groups are read one after the other; the columns of a row
// group are decoded in parallel.
func (r *reader) fill(f *frame.Frame, p *plan) error {
	gt := r.groupTarget()
	out, next := 0, 0 // next: cursor into p.picked
	var ids []int64
	var keep []int32
	gc := newCollector(r.src.maxRowGroup() * int64(len(r.targets)) * 8)
	err := r.eachRowGroup(p.universe, func(ref *rowGroupRef) error {
		defer gc.maybeCollect()
		keep = keep[:0]
		selective := false
		switch p.mode {
		case keepRows:
			selective = true
			end := ref.start + int64(ref.m)
			for next < len(p.picked) && p.picked[next] < end {
				keep = append(keep, int32(p.picked[next]-ref.start))
				next++
			}
			if len(keep) == 0 {
				return nil
			}
		}
		if gt >= 0 {
			ids = growInt64(ids, ref.n)
			if err := r.decodeGroupColumn(ref, ids); err != nil {
				return err
			}
		}
		if p.mode == keepGroups {
			selective = true
			for i, id := range ids[:ref.m] {
				if p.chosen[id] {
					keep = append(keep, int32(i))
				}
			}
			if len(keep) == 0 {
				return nil
			}
		}
		count := ref.m
		if selective {
			count = len(keep)
		}
		if out+count > f.Rows {
			return fmt.Errorf("traffic: %s: %w: more rows than planned (the file changed while it was read)", ref.info.path, ErrDamaged)
		}
		if gt >= 0 {
			dst := f.Group[out : out+count]
			if selective {
				for k, i := range keep {
					dst[k] = ids[i]
				}
			} else {
				copy(dst, ids[:count])
			}
		}
		var sel []int32
		if selective {
			sel = keep
		}
		if err := r.fillColumns(f, ref, out, count, sel); err != nil {
			return err
		}
		out += count
		return nil
	})
	if err != nil {
		return err
	}
	if out != f.Rows {
		return fmt.Errorf("traffic: %w: read %d rows, planned %d (a file changed while it was read)", ErrDamaged, out, f.Rows)
	}
	return nil
}

// fillColumns decodes the feature, label and weight columns of one row group
// into rows [out, out+count) of the frame: the first count rows of the row
// group when keep is nil, else the rows listed in keep.
func (r *reader) fillColumns(f *frame.Frame, ref *rowGroupRef, out, count int, keep []int32) error {
	var jobs []int
	for i := range r.targets {
		if r.targets[i].role != roleGroup && !r.src.absent[i] {
			jobs = append(jobs, i)
		}
	}
	errs := make([]error, len(jobs))
	missing := make([]int, len(jobs))
	parallel.Chunks(len(jobs), 1, r.workers, func(c, _, _ int) {
		i := jobs[c]
		t := &r.targets[i]
		col := ref.info.columns[i]
		dst := destination(f, t)[out : out+count]
		var err error
		if keep == nil && count == ref.n {
			err = decodeFloats(r.chunk(ref, col.leaf), col, t.categories, dst)
		} else {
			buf := getScratch(ref.n)
			err = decodeFloats(r.chunk(ref, col.leaf), col, t.categories, buf.v)
			if err == nil {
				if keep == nil {
					copy(dst, buf.v[:count])
				} else {
					for k, row := range keep {
						dst[k] = buf.v[row]
					}
				}
			}
			putScratch(buf)
		}
		if err != nil {
			errs[c] = fmt.Errorf("traffic: %s: %s: row group %d: %w", ref.info.path, t.describe(), ref.index, err)
			return
		}
		if t.role == roleFeature {
			missing[c] = countNaN(dst)
		}
	})
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	for c, i := range jobs {
		if t := &r.targets[i]; t.role == roleFeature {
			f.Missing[t.feature] += missing[c]
		}
	}
	return nil
}

func countNaN(v []float64) int {
	n := 0
	for _, x := range v {
		if x != x {
			n++
		}
	}
	return n
}

func destination(f *frame.Frame, t *target) []float64 {
	switch t.role {
	case roleFeature:
		return f.Columns[t.feature]
	case roleLabel:
		return f.Label
	case roleWeight:
		return f.Weight
	default:
		panic(fmt.Sprintf("traffic: no float destination for role %d", t.role))
	}
}

func growInt64(s []int64, n int) []int64 {
	if cap(s) < n {
		return make([]int64, n)
	}
	return s[:n]
}

// scratch is one row group's column, reused across row groups when only
// part of a row group is kept.
type scratch struct{ v []float64 }

var scratchPool sync.Pool

func getScratch(n int) *scratch {
	if s, ok := scratchPool.Get().(*scratch); ok && cap(s.v) >= n {
		s.v = s.v[:n]
		return s
	}
	return &scratch{v: make([]float64, n)}
}

func putScratch(s *scratch) { scratchPool.Put(s) }
