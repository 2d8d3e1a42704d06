package dedup

// External sort of fixed-width records under a memory budget.
//
// A Sorter accumulates records (packed uint64 band keys, 24-byte exact
// hash records, ...) in one slice. We do not assume that all records fit
// in memory: when the slice reaches the budget it is sorted and written to
// a temp file as a sorted run, and the slice is reused. Iterate sorts what
// is left in memory and merges it with every run through a binary heap,
// so the records come back in one globally sorted stream. When there are
// more runs than maxFanIn, groups of runs are first merged into longer
// runs, so the number of open files and read buffers stays bounded.
//
// Memory stays bounded because the only resident state is the in-memory
// slice (at most budget bytes) plus, while merging, one read buffer of
// runReadBuffer bytes per open run (at most maxFanIn of them). Runs are raw
// little-endian records with no header; they live only for one run of the
// program and are removed by Close.
//
// Not implemented: compression of runs (sorted keys would delta-encode
// well, but the page cache makes the disk cost small at workstation scale)
// and parallel sorting of runs.

import (
	"bufio"
	"cmp"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"os"
	"slices"
	"unsafe"
)

// Tuning constants of the external sort.
const (
	// maxFanIn bounds the runs merged at once: 64 runs × 64 KiB buffers
	// keep the merge under 4.5 MiB whatever the corpus size.
	maxFanIn = 64
	// runReadBuffer is the read buffer per run; large enough that reads
	// are sequential megabyte-scale I/O in aggregate.
	runReadBuffer = 64 << 10
	// runWriteBuffer is the buffer used to write a run.
	runWriteBuffer = 256 << 10
	// minRunRecords keeps a tiny budget (tests) from producing a run per
	// record.
	minRunRecords = 4
	// DefaultMemoryBudget is used when a caller passes a budget <= 0.
	DefaultMemoryBudget = 512 << 20
)

// Codec describes a fixed-width record type for a Sorter.
type Codec[T any] struct {
	// Size is the encoded size of one record in bytes.
	Size int
	// Put encodes v into b[:Size].
	Put func(b []byte, v T)
	// Get decodes a record from b[:Size].
	Get func(b []byte) T
	// Compare orders records (negative, zero, positive).
	Compare func(a, b T) int
	// Sort sorts a slice by Compare; nil uses slices.SortFunc.
	Sort func([]T)
}

// Uint64Codec encodes packed uint64 keys, sorted numerically.
var Uint64Codec = Codec[uint64]{
	Size:    8,
	Put:     func(b []byte, v uint64) { binary.LittleEndian.PutUint64(b, v) },
	Get:     func(b []byte) uint64 { return binary.LittleEndian.Uint64(b) },
	Compare: cmp.Compare[uint64],
	Sort:    func(s []uint64) { slices.Sort(s) },
}

// Sorter accumulates records and returns them sorted, spilling sorted runs
// to temp files when its memory budget is exceeded. It is not safe for
// concurrent use.
type Sorter[T any] struct {
	c       Codec[T]
	dir     string
	limit   int // records held in memory before a spill
	buf     []T
	runs    []string
	n       int64
	spilled int64
	done    bool
}

// NewSorter returns a Sorter that keeps at most budget bytes of records in
// memory (DefaultMemoryBudget when budget <= 0) and writes runs to dir.
func NewSorter[T any](c Codec[T], dir string, budget int64) *Sorter[T] {
	if budget <= 0 {
		budget = DefaultMemoryBudget
	}
	// The records in memory take the larger of their encoded size and
	// their Go size (a 10-byte record may occupy a 16-byte struct).
	var zero T
	limit := budget / max(int64(c.Size), int64(unsafe.Sizeof(zero)))
	if limit < minRunRecords {
		limit = minRunRecords
	}
	if limit > 1<<40 {
		limit = 1 << 40
	}
	return &Sorter[T]{c: c, dir: dir, limit: int(limit)}
}

// Add appends one record, spilling a sorted run when the budget is full.
func (s *Sorter[T]) Add(v T) error {
	if s.done {
		return errors.New("dedup: Sorter.Add after Iterate")
	}
	if len(s.buf) == cap(s.buf) {
		if len(s.buf) >= s.limit {
			if err := s.spill(); err != nil {
				return err
			}
		} else {
			// Grow by hand so the slice never exceeds the budget.
			nc := max(2*cap(s.buf), 1024)
			nc = min(nc, s.limit)
			nb := make([]T, len(s.buf), nc)
			copy(nb, s.buf)
			s.buf = nb
		}
	}
	s.buf = append(s.buf, v)
	s.n++
	return nil
}

// Len returns the number of records added.
func (s *Sorter[T]) Len() int64 { return s.n }

// Runs returns the number of sorted runs written to disk so far.
func (s *Sorter[T]) Runs() int { return len(s.runs) }

// SpilledBytes returns the bytes written to runs so far (merges included).
func (s *Sorter[T]) SpilledBytes() int64 { return s.spilled }

// ResidentBytes returns the bytes of records currently held in memory.
func (s *Sorter[T]) ResidentBytes() int64 {
	var zero T
	return int64(cap(s.buf)) * max(int64(s.c.Size), int64(unsafe.Sizeof(zero)))
}

func (s *Sorter[T]) sortBuf() {
	if s.c.Sort != nil {
		s.c.Sort(s.buf)
	} else {
		slices.SortFunc(s.buf, s.c.Compare)
	}
}

func (s *Sorter[T]) spill() error {
	s.sortBuf()
	path, err := s.writeRun(func(emit func(T) error) error {
		for _, v := range s.buf {
			if err := emit(v); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return err
	}
	s.runs = append(s.runs, path)
	s.buf = s.buf[:0]
	return nil
}

// writeRun writes the records produced by fill to a new temp file.
func (s *Sorter[T]) writeRun(fill func(emit func(T) error) error) (string, error) {
	f, err := os.CreateTemp(s.dir, "run-*")
	if err != nil {
		return "", fmt.Errorf("dedup: spill run: %w", err)
	}
	size := s.c.Size
	block := make([]byte, 0, runWriteBuffer/size*size)
	var werr error
	flush := func() error {
		if len(block) == 0 {
			return nil
		}
		n, err := f.Write(block)
		s.spilled += int64(n)
		block = block[:0]
		return err
	}
	werr = fill(func(v T) error {
		if len(block)+size > cap(block) {
			if err := flush(); err != nil {
				return err
			}
		}
		block = block[:len(block)+size]
		s.c.Put(block[len(block)-size:], v)
		return nil
	})
	if werr == nil {
		werr = flush()
	}
	if cerr := f.Close(); werr == nil {
		werr = cerr
	}
	if werr != nil {
		os.Remove(f.Name())
		return "", fmt.Errorf("dedup: write run %s: %w", f.Name(), werr)
	}
	return f.Name(), nil
}

// Iterate returns the records in sorted order. It may be called once;
// afterwards Add fails. The caller must Close the iterator.
func (s *Sorter[T]) Iterate() (*Iterator[T], error) {
	if s.done {
		return nil, errors.New("dedup: Sorter.Iterate called twice")
	}
	s.done = true
	s.sortBuf()
	it := &Iterator[T]{c: &s.c}
	if len(s.runs) == 0 {
		it.mem = s.buf
		s.buf = nil
		return it, nil
	}
	// Keep at most maxFanIn-1 runs plus the in-memory tail open at once.
	for len(s.runs) > maxFanIn-1 {
		group := s.runs[:maxFanIn]
		merged, err := s.mergeRuns(group)
		if err != nil {
			return nil, err
		}
		for _, p := range group {
			os.Remove(p)
		}
		s.runs = append([]string{merged}, s.runs[maxFanIn:]...)
	}
	srcs := make([]*source[T], 0, len(s.runs)+1)
	for _, p := range s.runs {
		src, err := openRun(&s.c, p)
		if err != nil {
			closeSources(srcs)
			return nil, err
		}
		srcs = append(srcs, src)
	}
	if len(s.buf) > 0 {
		srcs = append(srcs, &source[T]{mem: s.buf})
	}
	s.buf = nil
	if err := it.initHeap(srcs); err != nil {
		closeSources(srcs)
		return nil, err
	}
	return it, nil
}

// mergeRuns merges the given runs into one new run.
func (s *Sorter[T]) mergeRuns(paths []string) (string, error) {
	srcs := make([]*source[T], 0, len(paths))
	for _, p := range paths {
		src, err := openRun(&s.c, p)
		if err != nil {
			closeSources(srcs)
			return "", err
		}
		srcs = append(srcs, src)
	}
	it := &Iterator[T]{c: &s.c}
	if err := it.initHeap(srcs); err != nil {
		closeSources(srcs)
		return "", err
	}
	defer it.Close()
	return s.writeRun(func(emit func(T) error) error {
		for {
			v, ok := it.Next()
			if !ok {
				return it.Err()
			}
			if err := emit(v); err != nil {
				return err
			}
		}
	})
}

// Close removes the run files and releases memory.
func (s *Sorter[T]) Close() error {
	var first error
	for _, p := range s.runs {
		if err := os.Remove(p); err != nil && !os.IsNotExist(err) && first == nil {
			first = err
		}
	}
	s.runs = nil
	s.buf = nil
	return first
}

// source is one sorted input of a merge: a run file or the in-memory tail.
type source[T any] struct {
	cur T
	// in-memory tail
	mem []T
	pos int
	// run file
	f    *os.File
	path string
	buf  []byte
	off  int
	end  int
	c    *Codec[T]
}

func openRun[T any](c *Codec[T], path string) (*source[T], error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("dedup: open run: %w", err)
	}
	return &source[T]{f: f, path: path, c: c, buf: make([]byte, runReadBuffer/c.Size*c.Size)}, nil
}

// next loads the next record into cur; false at the end.
func (s *source[T]) next() (bool, error) {
	if s.f == nil {
		if s.pos >= len(s.mem) {
			return false, nil
		}
		s.cur = s.mem[s.pos]
		s.pos++
		return true, nil
	}
	size := s.c.Size
	if s.off+size > s.end {
		n, err := io.ReadFull(s.f, s.buf)
		if err == io.EOF {
			return false, nil
		}
		if err != nil && err != io.ErrUnexpectedEOF {
			return false, fmt.Errorf("dedup: read run %s: %w", s.path, err)
		}
		if n%size != 0 {
			return false, fmt.Errorf("dedup: run %s is truncated (%d stray bytes)", s.path, n%size)
		}
		s.off, s.end = 0, n
	}
	s.cur = s.c.Get(s.buf[s.off:])
	s.off += size
	return true, nil
}

func (s *source[T]) close() {
	if s.f != nil {
		s.f.Close()
		s.f = nil
	}
}

func closeSources[T any](srcs []*source[T]) {
	for _, s := range srcs {
		s.close()
	}
}

// Iterator returns the records of a Sorter in sorted order.
type Iterator[T any] struct {
	c    *Codec[T]
	mem  []T // only source when nothing was spilled
	pos  int
	heap []*source[T]
	err  error
}

func (it *Iterator[T]) initHeap(srcs []*source[T]) error {
	for _, s := range srcs {
		ok, err := s.next()
		if err != nil {
			return err
		}
		if ok {
			it.heap = append(it.heap, s)
		} else {
			s.close()
		}
	}
	for i := len(it.heap)/2 - 1; i >= 0; i-- {
		it.down(i)
	}
	return nil
}

func (it *Iterator[T]) down(i int) {
	h := it.heap
	n := len(h)
	for {
		l := 2*i + 1
		if l >= n {
			return
		}
		m := l
		if r := l + 1; r < n && it.c.Compare(h[r].cur, h[l].cur) < 0 {
			m = r
		}
		if it.c.Compare(h[m].cur, h[i].cur) >= 0 {
			return
		}
		h[i], h[m] = h[m], h[i]
		i = m
	}
}

// Next returns the next record; ok is false at the end or on error (see
// Err).
func (it *Iterator[T]) Next() (v T, ok bool) {
	if it.heap == nil {
		if it.pos >= len(it.mem) {
			return v, false
		}
		v = it.mem[it.pos]
		it.pos++
		return v, true
	}
	if len(it.heap) == 0 || it.err != nil {
		return v, false
	}
	top := it.heap[0]
	v = top.cur
	more, err := top.next()
	if err != nil {
		it.err = err
		return v, false
	}
	if !more {
		top.close()
		last := len(it.heap) - 1
		it.heap[0] = it.heap[last]
		it.heap = it.heap[:last]
		if last == 0 {
			return v, true
		}
	}
	it.down(0)
	return v, true
}

// Err returns the first read error met by Next.
func (it *Iterator[T]) Err() error { return it.err }

// Close releases the iterator's files and memory.
func (it *Iterator[T]) Close() error {
	closeSources(it.heap)
	it.heap = it.heap[:0]
	it.mem = nil
	return nil
}

// idLog is an append-only temp file of (order key, id) records in input
// order: the ids a global index needs only after Reduce (for "of" fields
// and key files) stay on disk instead of in memory. Record layout:
// uvarint order, uvarint len(id), id bytes.
type idLog struct {
	f *os.File
	w *bufio.Writer
	n int64
	b []byte
}

func newIDLog(dir string) (*idLog, error) {
	f, err := os.CreateTemp(dir, "ids-*")
	if err != nil {
		return nil, fmt.Errorf("dedup: id log: %w", err)
	}
	return &idLog{f: f, w: bufio.NewWriterSize(f, runWriteBuffer)}, nil
}

func (l *idLog) add(order uint64, id string) error {
	l.b = binary.AppendUvarint(l.b[:0], order)
	l.b = binary.AppendUvarint(l.b, uint64(len(id)))
	l.b = append(l.b, id...)
	_, err := l.w.Write(l.b)
	l.n++
	return err
}

// reader flushes the log and returns a reader from its start.
func (l *idLog) reader() (*idLogReader, error) {
	if err := l.w.Flush(); err != nil {
		return nil, fmt.Errorf("dedup: id log: %w", err)
	}
	if _, err := l.f.Seek(0, io.SeekStart); err != nil {
		return nil, fmt.Errorf("dedup: id log: %w", err)
	}
	return &idLogReader{r: bufio.NewReaderSize(l.f, runReadBuffer)}, nil
}

func (l *idLog) close() {
	if l != nil && l.f != nil {
		l.f.Close()
		os.Remove(l.f.Name())
		l.f = nil
	}
}

type idLogReader struct {
	r  *bufio.Reader
	id []byte
}

// next returns the next record; io.EOF at the end. id is valid until the
// next call.
func (r *idLogReader) next() (order uint64, id []byte, err error) {
	order, err = binary.ReadUvarint(r.r)
	if err != nil {
		return 0, nil, err
	}
	n, err := binary.ReadUvarint(r.r)
	if err != nil {
		return 0, nil, fmt.Errorf("dedup: id log truncated: %w", err)
	}
	if n > 1<<30 {
		return 0, nil, fmt.Errorf("dedup: id log corrupt (id of %d bytes)", n)
	}
	if cap(r.id) < int(n) {
		r.id = make([]byte, n)
	}
	r.id = r.id[:n]
	if _, err := io.ReadFull(r.r, r.id); err != nil {
		return 0, nil, fmt.Errorf("dedup: id log truncated: %w", err)
	}
	return order, r.id, nil
}

// partLog is a set of append-only temp files of fixed-width records, one
// per partition (a band of near dedup, a hash range of exact dedup),
// written during Collect and read back one partition at a time in Reduce,
// so only one partition's records are ever in memory.
type partLog[T any] struct {
	c   *Codec[T]
	f   []*os.File
	w   []*bufio.Writer
	n   []int64
	buf []byte
}

// partWriteBuffer is the write buffer per partition file: 32 KiB × 16
// partitions keep the scan-time footprint at half a megabyte.
const partWriteBuffer = 32 << 10

func newPartLog[T any](c *Codec[T], dir, name string, parts int) (*partLog[T], error) {
	l := &partLog[T]{c: c, n: make([]int64, parts), buf: make([]byte, c.Size)}
	for p := 0; p < parts; p++ {
		f, err := os.CreateTemp(dir, fmt.Sprintf("%s-%03d-*", name, p))
		if err != nil {
			l.close()
			return nil, fmt.Errorf("dedup: partition file: %w", err)
		}
		l.f = append(l.f, f)
		l.w = append(l.w, bufio.NewWriterSize(f, partWriteBuffer))
	}
	return l, nil
}

func (l *partLog[T]) add(p int, v T) error {
	l.c.Put(l.buf, v)
	l.n[p]++
	_, err := l.w[p].Write(l.buf)
	return err
}

func (l *partLog[T]) flush() error {
	for _, w := range l.w {
		if err := w.Flush(); err != nil {
			return fmt.Errorf("dedup: partition file: %w", err)
		}
	}
	return nil
}

// count returns the records written to partition p.
func (l *partLog[T]) count(p int) int64 { return l.n[p] }

// each calls f with every record of partition p, in the order written.
func (l *partLog[T]) each(p int, f func(T) error) error {
	size := l.c.Size
	r := io.NewSectionReader(l.f[p], 0, 1<<62)
	buf := make([]byte, runReadBuffer/size*size)
	for {
		n, err := io.ReadFull(r, buf)
		if n%size != 0 {
			return fmt.Errorf("dedup: partition file %s truncated", l.f[p].Name())
		}
		for i := 0; i < n; i += size {
			if ferr := f(l.c.Get(buf[i:])); ferr != nil {
				return ferr
			}
		}
		if err == io.EOF || err == io.ErrUnexpectedEOF {
			return nil
		}
		if err != nil {
			return fmt.Errorf("dedup: partition file: %w", err)
		}
	}
}

// read appends every record of partition p to dst.
func (l *partLog[T]) read(p int, dst []T) ([]T, error) {
	err := l.each(p, func(v T) error { dst = append(dst, v); return nil })
	return dst, err
}

func (l *partLog[T]) close() {
	if l == nil {
		return
	}
	for _, f := range l.f {
		f.Close()
		os.Remove(f.Name())
	}
	l.f, l.w = nil, nil
}
