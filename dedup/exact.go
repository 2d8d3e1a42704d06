package dedup

// Exact duplicate detection by xxh3-128 of normalized text.
//
// Each document's text is normalized (normalize.go: case folded,
// whitespace collapsed, optionally punctuation deleted and digits folded)
// and hashed with xxh3-128. Add appends one 24-byte record (hash high,
// hash low, order key) to one of 64 partition files chosen by the top 6
// bits of the hash; the document's id goes to an append-only id log on
// disk. Reduce sorts the partitions one at a time (in memory when one
// partition fits the memory budget, else with an external Sorter that
// spills sorted runs and merges them) and walks the records in (hash,
// order) order: the first record of every hash group is the earliest
// document and is kept, the others are removed "of" it. A second,
// sequential pass over the id log (in input order) resolves the ids of
// kept documents that removed ones point to, and writes this run's key
// files.
//
// Memory per document: nothing while scanning (records go to disk through
// two megabytes of write buffers); in Reduce 32/64 = 0.5 bytes per
// document on average for the partition being sorted (never more than the
// memory budget), and 16 bytes per removed document (order key, index of
// the kept document, similarity) plus the id string of each kept document
// that has copies. Ids of all other documents never enter memory. Disk:
// 32 bytes per document plus its id. A 128-bit hash makes an accidental
// collision (two different texts treated as copies) vanishingly unlikely
// (~N²/2^129).
//
// Incremental runs: when a previous run's keys are given, the walk merges
// the previous run's kept hashes (sorted the same way) with this run's, so
// a document whose hash a previous run kept is removed "of" that run's
// document whatever its priority; the previous run's text is never read.
//
// Key files (this run's kept documents), written atomically:
//
//	PREFIX.hashes   16-byte header: "WNWXKEY1", one flags byte (bit 0
//	                fold_punct, bit 1 fold_digits), 7 zero bytes; then
//	                24-byte records hash.Hi, hash.Lo, order key (uint64
//	                little-endian each), sorted by (Hi, Lo).
//	PREFIX.ids.zst  zstd stream: "WNWIDS01", then per kept document in
//	                input order: uvarint order key, uvarint len(id), id.
//
// A split run cuts Reduce into the 64 partitions, reduced by separate
// processes (exact_split.go).
//
// Not implemented: documents whose normalized text is empty are not
// indexed (never removed, never a reason to remove another).

import (
	"bufio"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"sync"

	"github.com/klauspost/compress/zstd"
	"github.com/zeebo/xxh3"

	"winnow/stages/fsio"
)

// Layout constants of exact dedup and its key files.
const (
	// exactPartitionBits: records are split by the top 6 bits of the hash
	// into KeyPartitions partition files, so Reduce holds 1/64 of them at
	// a time.
	exactPartitionBits = 6
	exactPartitions    = 1 << exactPartitionBits
	exactKeysMagic     = "WNWXKEY1"
	idsMagic           = "WNWIDS01"
	exactHeaderLen     = 16
	// exactRecLen is a sort record: hash (16), priority (8), order (8).
	exactRecLen = 32
	// exactKeyLen is a key-file record: hash (16), order (8).
	exactKeyLen = 24
)

// Hash128 is a 128-bit xxh3 digest.
type Hash128 struct{ Hi, Lo uint64 }

// Match says why a document was removed: the id of the document it
// duplicates, their similarity (1 for exact copies) and whether that
// document belongs to a previous run.
type Match struct {
	Of         string
	Similarity float64
	Against    bool
}

var normPool = sync.Pool{New: func() any { b := make([]byte, 0, 4096); return &b }}

// ExactHash returns the xxh3-128 of the normalized text; ok is false when
// the normalized text is empty.
func ExactHash(text string, norm Normalization) (h Hash128, ok bool) {
	bp := normPool.Get().(*[]byte)
	b := norm.Append((*bp)[:0], text)
	if len(b) > 0 {
		d := xxh3.Hash128(b)
		h, ok = Hash128{Hi: d.Hi, Lo: d.Lo}, true
	}
	if cap(b) <= maxPooledScratch {
		*bp = b
		normPool.Put(bp)
	}
	return h, ok
}

type exactRec struct{ hi, lo, prio, order uint64 }

func cmpExactHash(a, b exactRec) int {
	if a.hi != b.hi {
		if a.hi < b.hi {
			return -1
		}
		return 1
	}
	if a.lo != b.lo {
		if a.lo < b.lo {
			return -1
		}
		return 1
	}
	return 0
}

// putExactKey encodes a key-file record (hash, order: no priority).
func putExactKey(b []byte, v exactRec) {
	binary.LittleEndian.PutUint64(b, v.hi)
	binary.LittleEndian.PutUint64(b[8:], v.lo)
	binary.LittleEndian.PutUint64(b[16:], v.order)
}

func getExactKey(b []byte) exactRec {
	return exactRec{hi: binary.LittleEndian.Uint64(b), lo: binary.LittleEndian.Uint64(b[8:]), order: binary.LittleEndian.Uint64(b[16:])}
}

// exactCodec sorts by (hash, priority, order).
var exactCodec = Codec[exactRec]{
	Size: exactRecLen,
	Put: func(b []byte, v exactRec) {
		binary.LittleEndian.PutUint64(b, v.hi)
		binary.LittleEndian.PutUint64(b[8:], v.lo)
		binary.LittleEndian.PutUint64(b[16:], v.prio)
		binary.LittleEndian.PutUint64(b[24:], v.order)
	},
	Get: func(b []byte) exactRec {
		return exactRec{binary.LittleEndian.Uint64(b), binary.LittleEndian.Uint64(b[8:]), binary.LittleEndian.Uint64(b[16:]), binary.LittleEndian.Uint64(b[24:])}
	},
	Compare: func(a, b exactRec) int {
		if c := cmpExactHash(a, b); c != 0 {
			return c
		}
		if a.prio != b.prio {
			if a.prio < b.prio {
				return -1
			}
			return 1
		}
		if a.order != b.order {
			if a.order < b.order {
				return -1
			}
			return 1
		}
		return 0
	},
}

// ExactOptions configures an ExactIndex.
type ExactOptions struct {
	Norm Normalization
	// TempDir holds spill files ("" for the system temp dir).
	TempDir string
	// MemoryBudget bounds the bytes of sort records held in memory.
	MemoryBudget int64
	// Against is the key-file prefix of a previous run ("" for none).
	Against string
	// KeysOut is the key-file prefix this run's kept keys are written to
	// ("" to write none).
	KeysOut string
}

// IndexStats describes what an index did, for reports and benchmarks.
type IndexStats struct {
	Docs          int64 // documents indexed
	Removed       int64 // documents removed
	RemovedPrev   int64 // of those, duplicates of a previous run's document
	Records       int64 // sort records (band keys for near dedup)
	Runs          int   // sorted runs spilled
	SpilledBytes  int64 // bytes written to runs
	ResidentBytes int64 // peak bytes of sort records held in memory
	Candidates    int64 // near dedup: candidate pairs verified
	Verified      int64 // near dedup: pairs at or above the threshold
}

// ExactIndex finds exact copies among documents added in input order.
type ExactIndex struct {
	opt      ExactOptions
	dir      string
	parts    *partLog[exactRec]
	ids      *idLog
	last     uint64
	started  bool
	reduced  bool
	rm       removals
	stats    IndexStats
	prevPath string
	// only, when not nil, marks the partitions this index reduces
	// (RestrictPartitions); records of the others are skipped.
	only     []bool
	onlyList []int
}

// NewExactIndex returns an empty index. When opt.Against is set, the
// previous run's key files are checked for presence and compatibility.
func NewExactIndex(opt ExactOptions) (*ExactIndex, error) {
	if opt.Against != "" {
		if err := checkExactKeys(opt.Against, opt.Norm); err != nil {
			return nil, err
		}
	}
	dir, err := os.MkdirTemp(opt.TempDir, "winnow-exact-*")
	if err != nil {
		return nil, fmt.Errorf("dedup: temp dir: %w", err)
	}
	x := &ExactIndex{opt: opt, dir: dir}
	if x.ids, err = newIDLog(dir); err == nil {
		x.parts, err = newPartLog(&exactCodec, dir, "hashes", exactPartitions)
	}
	if err != nil {
		x.Close()
		return nil, err
	}
	return x, nil
}

func normFlags(n Normalization) byte {
	var f byte
	if n.FoldPunct {
		f |= 1
	}
	if n.FoldDigits {
		f |= 2
	}
	return f
}

func checkExactKeys(prefix string, norm Normalization) error {
	f, err := os.Open(prefix + ".hashes")
	if err != nil {
		return fmt.Errorf("previous run keys: %w", err)
	}
	defer f.Close()
	var hdr [exactHeaderLen]byte
	if _, err := io.ReadFull(f, hdr[:]); err != nil || string(hdr[:8]) != exactKeysMagic {
		return fmt.Errorf("previous run keys %s.hashes: not an exact-dedup key file", prefix)
	}
	if hdr[8] != normFlags(norm) {
		return fmt.Errorf("previous run keys %s.hashes: written with fold_punct=%v fold_digits=%v, this run uses fold_punct=%v fold_digits=%v; the hashes are not comparable",
			prefix, hdr[8]&1 != 0, hdr[8]&2 != 0, norm.FoldPunct, norm.FoldDigits)
	}
	st, err := f.Stat()
	if err != nil {
		return err
	}
	if (st.Size()-exactHeaderLen)%exactKeyLen != 0 {
		return fmt.Errorf("previous run keys %s.hashes: truncated", prefix)
	}
	if _, err := os.Stat(prefix + ".ids.zst"); err != nil {
		return fmt.Errorf("previous run keys: %w", err)
	}
	return nil
}

// Add records one document's hash with priority 0 (see AddPriority).
func (x *ExactIndex) Add(order uint64, id string, h Hash128) error {
	return x.AddPriority(order, id, h, 0)
}

// AddPriority records one document's hash and keep priority (KeepRule.Priority:
// of a group of copies the lowest priority is kept, ties by input order).
// Documents must be added in input order (strictly increasing order keys).
func (x *ExactIndex) AddPriority(order uint64, id string, h Hash128, priority uint64) error {
	if x.reduced {
		return errors.New("dedup: ExactIndex.Add after Reduce")
	}
	if x.started && order <= x.last {
		return fmt.Errorf("dedup: documents out of input order (order key %d after %d)", order, x.last)
	}
	x.started, x.last = true, order
	p := int(h.Hi >> (64 - exactPartitionBits))
	if x.only != nil && !x.only[p] {
		return nil // another task reduces this partition (exact_split.go)
	}
	if err := x.parts.add(p, exactRec{h.Hi, h.Lo, priority, order}); err != nil {
		return err
	}
	x.stats.Docs++
	return x.ids.add(order, id)
}

// createHashesOut starts this run's PREFIX.hashes key file with its
// header (nil when the run writes no key files).
func (x *ExactIndex) createHashesOut() (*fsio.AtomicFile, error) {
	if x.opt.KeysOut == "" {
		return nil, nil
	}
	out, err := fsio.CreateAtomic(x.opt.KeysOut + ".hashes")
	if err != nil {
		return nil, fmt.Errorf("dedup: keys: %w", err)
	}
	if _, err := out.Write(exactKeysHeader(x.opt.Norm)); err != nil {
		out.Abort()
		return nil, err
	}
	return out, nil
}

// Reduce decides which documents are copies. It is called once, after the
// last Add.
func (x *ExactIndex) Reduce() (err error) {
	if x.reduced {
		return errors.New("dedup: ExactIndex.Reduce called twice")
	}
	x.reduced = true
	out, err := x.createHashesOut()
	if err != nil {
		return err
	}
	if out != nil {
		defer func() {
			if err != nil {
				out.Abort()
			}
		}()
	}
	var recBuf [exactKeyLen]byte
	err = x.walk(func(r exactRec) error {
		if out == nil {
			return nil
		}
		putExactKey(recBuf[:], r)
		_, err := out.Write(recBuf[:])
		return err
	})
	if err != nil {
		return err
	}

	// Pass over the id log in input order: ids of kept documents that
	// copies point to, and this run's kept ids.
	var ids *idsOut
	if x.opt.KeysOut != "" {
		if ids, err = createIDs(x.opt.KeysOut + ".ids.zst"); err != nil {
			return err
		}
		defer func() {
			if err != nil {
				ids.abort()
			}
		}()
	}
	if err = x.resolveIDs(ids); err != nil {
		return err
	}
	if out != nil {
		if err = out.Commit(); err != nil {
			return fmt.Errorf("dedup: keys: %w", err)
		}
		if err = ids.commit(); err != nil {
			return fmt.Errorf("dedup: keys: %w", err)
		}
	}
	return nil
}

// resolveIDs passes over the id log in input order: it fills the ids of
// kept documents that copies point to (and of a previous run's, from its
// ids file) and, when ids is not nil, writes this run's kept ids.
func (x *ExactIndex) resolveIDs(ids *idsOut) error {
	need := x.rm.repsNeeded(false)
	rd, err := x.ids.reader()
	if err != nil {
		return err
	}
	ri, ni := 0, 0
	for {
		order, id, rerr := rd.next()
		if rerr == io.EOF {
			break
		}
		if rerr != nil {
			return rerr
		}
		for ni < len(need) && x.rm.reps[need[ni]].order < order {
			ni++
		}
		for ni < len(need) && x.rm.reps[need[ni]].order == order {
			x.rm.reps[need[ni]].id = string(id)
			ni++
		}
		for ri < len(x.rm.list) && x.rm.list[ri].order < order {
			ri++
		}
		removed := ri < len(x.rm.list) && x.rm.list[ri].order == order
		if !removed && ids != nil {
			if err := ids.add(order, id); err != nil {
				return err
			}
		}
	}
	x.ids.close()
	if x.opt.Against != "" {
		return x.rm.resolvePrevIDs(x.opt.Against + ".ids.zst")
	}
	return nil
}

// exactKeysHeader is the 16-byte header of a PREFIX.hashes file.
func exactKeysHeader(norm Normalization) []byte {
	hdr := make([]byte, exactHeaderLen)
	copy(hdr, exactKeysMagic)
	hdr[8] = normFlags(norm)
	return hdr
}

// walk sorts the partitions one at a time and walks the records in
// (hash, priority, order) order, filling x.rm (sorted by order key at the
// end, reps without ids). kept is called, in hash order, with the record
// of every hash group this run keeps (the key-file records).
func (x *ExactIndex) walk(kept func(exactRec) error) (err error) {
	if err := x.parts.flush(); err != nil {
		return err
	}
	it := &exactSource{x: x}
	defer it.close()
	var prev *exactKeyReader
	if x.opt.Against != "" {
		if prev, err = openExactKeys(x.opt.Against); err != nil {
			return err
		}
		defer prev.close()
	}
	cur, have := it.Next()
	for have {
		first := cur
		part := uint8(first.hi >> (64 - exactPartitionBits))
		rep := int32(-1)
		if prev != nil {
			p, ok, perr := prev.seek(first)
			if perr != nil {
				return perr
			}
			if ok {
				rep = x.rm.addRep(p.order, true)
				x.rm.reps[rep].part = part
				x.rm.add(first.order, rep, 1)
				x.stats.RemovedPrev++
			}
		}
		if rep < 0 {
			if err = kept(first); err != nil {
				return err
			}
		}
		for {
			cur, have = it.Next()
			if !have || cmpExactHash(cur, first) != 0 {
				break
			}
			if rep < 0 {
				rep = x.rm.addRep(first.order, false)
				x.rm.reps[rep].part = part
			} else if x.rm.reps[rep].against {
				x.stats.RemovedPrev++
			}
			x.rm.add(cur.order, rep, 1)
		}
	}
	if err = it.err; err != nil {
		return err
	}
	x.rm.sort()
	x.stats.Removed = int64(len(x.rm.list))
	return nil
}

// Lookup returns why the document with the given order key was removed;
// ok is false when it is kept. Safe for concurrent use after Reduce.
func (x *ExactIndex) Lookup(order uint64) (Match, bool) { return x.rm.lookup(order) }

// Stats returns counters of the index.
func (x *ExactIndex) Stats() IndexStats { return x.stats }

// Close removes temp files.
func (x *ExactIndex) Close() error {
	x.ids.close()
	x.parts.close()
	return os.RemoveAll(x.dir)
}

// exactSource returns the records of all partitions in (hash, order)
// order: partition p holds the hashes whose top exactPartitionBits bits are
// p, so sorting each partition and concatenating them sorts everything.
// A partition that fits the budget is sorted in memory, a larger one by an
// external Sorter.
type exactSource struct {
	x      *ExactIndex
	p      int
	mem    []exactRec
	pos    int
	sorter *Sorter[exactRec]
	it     *Iterator[exactRec]
	err    error
}

// Next returns the next record; false at the end or on error (s.err).
func (s *exactSource) Next() (exactRec, bool) {
	for {
		if s.it != nil {
			if v, ok := s.it.Next(); ok {
				return v, true
			}
			if s.err = s.it.Err(); s.err != nil {
				return exactRec{}, false
			}
			s.closeSorter()
		} else if s.pos < len(s.mem) {
			s.pos++
			return s.mem[s.pos-1], true
		}
		if s.p >= exactPartitions || s.err != nil {
			return exactRec{}, false
		}
		s.err = s.load(s.p)
		s.p++
	}
}

func (s *exactSource) load(p int) error {
	x := s.x
	budget := x.opt.MemoryBudget
	if budget <= 0 {
		budget = DefaultMemoryBudget
	}
	n := x.parts.count(p)
	x.stats.Records += n
	if n*exactRecLen <= budget {
		var err error
		if s.mem, err = x.parts.read(p, s.mem[:0]); err != nil {
			return err
		}
		slices.SortFunc(s.mem, exactCodec.Compare)
		s.pos = 0
		x.stats.ResidentBytes = max(x.stats.ResidentBytes, int64(cap(s.mem))*exactRecLen)
		return nil
	}
	s.mem, s.pos = s.mem[:0], 0
	s.sorter = NewSorter(exactCodec, x.dir, budget)
	if err := x.parts.each(p, s.sorter.Add); err != nil {
		return err
	}
	x.stats.Runs += s.sorter.Runs()
	x.stats.ResidentBytes = max(x.stats.ResidentBytes, s.sorter.ResidentBytes())
	it, err := s.sorter.Iterate()
	if err != nil {
		return err
	}
	s.it = it
	x.stats.SpilledBytes += s.sorter.SpilledBytes()
	return nil
}

func (s *exactSource) closeSorter() {
	if s.it != nil {
		s.it.Close()
		s.it = nil
	}
	if s.sorter != nil {
		s.sorter.Close()
		s.sorter = nil
	}
}

func (s *exactSource) close() { s.closeSorter(); s.mem = nil }

// exactKeyReader streams a previous run's PREFIX.hashes file.
type exactKeyReader struct {
	f    *os.File
	r    *bufio.Reader
	cur  exactRec
	have bool
	done bool
	path string
}

func openExactKeys(prefix string) (*exactKeyReader, error) {
	path := prefix + ".hashes"
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("previous run keys: %w", err)
	}
	r := bufio.NewReaderSize(f, runReadBuffer)
	if _, err := r.Discard(exactHeaderLen); err != nil {
		f.Close()
		return nil, fmt.Errorf("previous run keys %s: %w", path, err)
	}
	return &exactKeyReader{f: f, r: r, path: path}, nil
}

func (k *exactKeyReader) advance() error {
	var b [exactKeyLen]byte
	if _, err := io.ReadFull(k.r, b[:]); err != nil {
		if err == io.EOF {
			k.have, k.done = false, true
			return nil
		}
		return fmt.Errorf("previous run keys %s: %w", k.path, err)
	}
	k.cur, k.have = getExactKey(b[:]), true
	return nil
}

// seek advances to the first record whose hash is >= h's and reports
// whether it equals h's.
func (k *exactKeyReader) seek(h exactRec) (exactRec, bool, error) {
	for !k.done && (!k.have || cmpExactHash(k.cur, h) < 0) {
		if err := k.advance(); err != nil {
			return exactRec{}, false, err
		}
	}
	return k.cur, k.have && cmpExactHash(k.cur, h) == 0, nil
}

func (k *exactKeyReader) close() { k.f.Close() }

// removal is one removed document: 16 bytes.
type removal struct {
	order uint64
	rep   int32  // index into removals.reps
	sim   uint16 // similarity × 10000, rounded
}

type repInfo struct {
	order   uint64 // order key of the kept document (in its own run)
	id      string
	against bool
	part    uint8 // exact dedup: the hash partition of the group
}

// removals is the decision table an index builds in Reduce and Apply
// reads: removed documents sorted by order key, and the kept documents
// they point to.
type removals struct {
	list []removal
	reps []repInfo
}

func (r *removals) addRep(order uint64, against bool) int32 {
	r.reps = append(r.reps, repInfo{order: order, against: against})
	return int32(len(r.reps) - 1)
}

func (r *removals) add(order uint64, rep int32, sim float64) {
	r.list = append(r.list, removal{order: order, rep: rep, sim: uint16(math.Round(sim * 10000))})
}

func (r *removals) sort() {
	slices.SortFunc(r.list, func(a, b removal) int {
		if a.order < b.order {
			return -1
		}
		if a.order > b.order {
			return 1
		}
		return 0
	})
}

// repsNeeded returns the indices of reps of this run (against=false) or of
// a previous run (true), sorted by order key.
func (r *removals) repsNeeded(against bool) []int32 {
	var idx []int32
	for i, p := range r.reps {
		if p.against == against {
			idx = append(idx, int32(i))
		}
	}
	slices.SortFunc(idx, func(a, b int32) int {
		oa, ob := r.reps[a].order, r.reps[b].order
		if oa < ob {
			return -1
		}
		if oa > ob {
			return 1
		}
		return 0
	})
	return idx
}

// resolvePrevIDs fills the ids of previous-run reps from an ids file.
func (r *removals) resolvePrevIDs(path string) error {
	need := r.repsNeeded(true)
	if len(need) == 0 {
		return nil
	}
	rd, err := openIDs(path)
	if err != nil {
		return err
	}
	defer rd.close()
	ni := 0
	for ni < len(need) {
		order, id, err := rd.next()
		if err == io.EOF {
			break
		}
		if err != nil {
			return err
		}
		for ni < len(need) && r.reps[need[ni]].order == order {
			r.reps[need[ni]].id = string(id)
			ni++
		}
	}
	if ni < len(need) {
		return fmt.Errorf("previous run keys %s: no id for order key %d", path, r.reps[need[ni]].order)
	}
	return nil
}

func (r *removals) lookup(order uint64) (Match, bool) {
	i, ok := slices.BinarySearchFunc(r.list, order, func(e removal, o uint64) int {
		if e.order < o {
			return -1
		}
		if e.order > o {
			return 1
		}
		return 0
	})
	if !ok {
		return Match{}, false
	}
	e := r.list[i]
	p := r.reps[e.rep]
	return Match{Of: p.id, Similarity: float64(e.sim) / 10000, Against: p.against}, true
}

// zstdOut is a zstd key file being written: a buffered stream that is
// committed atomically or aborted. The ids and near key writers embed it.
type zstdOut struct {
	z *fsio.ZstdWriter
	w *bufio.Writer
	b []byte // scratch for one record
}

// create creates the file at path and writes its header (magic and any
// fixed fields); on a header write error the file is aborted.
func (o *zstdOut) create(path string, header []byte) error {
	z, err := fsio.CreateZstd(path)
	if err != nil {
		return fmt.Errorf("dedup: keys: %w", err)
	}
	o.z, o.w = z, bufio.NewWriterSize(z, runWriteBuffer)
	if _, err := o.w.Write(header); err != nil {
		z.Abort()
		return err
	}
	return nil
}

// commit flushes the buffer, finishes the stream and renames the file
// into place.
func (o *zstdOut) commit() error {
	if err := o.w.Flush(); err != nil {
		o.z.Abort()
		return err
	}
	return o.z.Commit()
}

// abort discards the file.
func (o *zstdOut) abort() { o.z.Abort() }

// idsOut is an ids key file being written.
type idsOut struct{ zstdOut }

func createIDs(path string) (*idsOut, error) {
	o := &idsOut{}
	if err := o.create(path, []byte(idsMagic)); err != nil {
		return nil, err
	}
	return o, nil
}

func (o *idsOut) add(order uint64, id []byte) error {
	o.b = binary.AppendUvarint(o.b[:0], order)
	o.b = binary.AppendUvarint(o.b, uint64(len(id)))
	o.b = append(o.b, id...)
	_, err := o.w.Write(o.b)
	return err
}

// zstdIn reads a zstd key file.
type zstdIn struct {
	f    *os.File
	d    *zstd.Decoder
	r    *bufio.Reader
	path string
	id   []byte
}

func openZstd(path, magic string) (*zstdIn, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("previous run keys: %w", err)
	}
	d, err := zstd.NewReader(f, zstd.WithDecoderConcurrency(1))
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("previous run keys %s: %w", path, err)
	}
	in := &zstdIn{f: f, d: d, r: bufio.NewReaderSize(d, runReadBuffer), path: path}
	m := make([]byte, len(magic))
	if _, err := io.ReadFull(in.r, m); err != nil || string(m) != magic {
		in.close()
		return nil, fmt.Errorf("previous run keys %s: not a winnow key file of this kind", path)
	}
	return in, nil
}

func openIDs(path string) (*zstdIn, error) { return openZstd(path, idsMagic) }

// next reads one (order, id) record of an ids file; io.EOF at the end.
func (in *zstdIn) next() (uint64, []byte, error) {
	order, err := binary.ReadUvarint(in.r)
	if err == io.EOF {
		return 0, nil, io.EOF
	}
	if err != nil {
		return 0, nil, fmt.Errorf("previous run keys %s: %w", in.path, err)
	}
	id, err := in.bytes()
	return order, id, err
}

// bytes reads a uvarint-length-prefixed byte string.
func (in *zstdIn) bytes() ([]byte, error) {
	n, err := binary.ReadUvarint(in.r)
	if err != nil {
		return nil, fmt.Errorf("previous run keys %s: truncated: %w", in.path, err)
	}
	if n > 1<<30 {
		return nil, fmt.Errorf("previous run keys %s: corrupt length %d", in.path, n)
	}
	if cap(in.id) < int(n) {
		in.id = make([]byte, n)
	}
	in.id = in.id[:n]
	if _, err := io.ReadFull(in.r, in.id); err != nil {
		return nil, fmt.Errorf("previous run keys %s: truncated: %w", in.path, err)
	}
	return in.id, nil
}

func (in *zstdIn) close() {
	in.d.Close()
	in.f.Close()
}
