package dedup

// Near-duplicate detection: MinHash signatures (minhash.go), LSH banding
// (lsh.go), candidate verification, union-find clusters (unionfind.go).
//
// Scan (NearIndex.Key, pure, any goroutine) computes a document's
// signature and its band hashes. Add (input order, one goroutine) gives the
// document the next dense index, appends its signature record to a temp
// file, its (order key, id) to the id log, and one packed band key
// (bandHash<<32 | index) to the temp file of each band. Reduce:
//
//  1. takes the bands one at a time: reads the band's keys (already in
//     index order), sorts them by band hash (a stable radix sort; or an
//     external sort when even one band's keys exceed the memory budget),
//     so documents sharing a band hash arrive together, in input order.
//     Each group keeps up to maxHeads "heads" (the earliest distinct
//     members); every later member is compared with the heads, skipping
//     it when a head is already in its cluster, and is unioned with the
//     first head it matches. A match is an estimated Jaccard (fraction of
//     equal signature values) >= threshold, or under verify exact the
//     exact Jaccard of the two documents' hashed shingle sets. Comparing
//     with heads instead of all pairs bounds the work of big groups
//     (thousands of mirrored pages) to maxHeads per member.
//  2. every document whose cluster root (smallest index = earliest
//     document) is not itself is removed "of" the root, with the
//     similarity of the two (estimated, or exact under verify exact). In a
//     chain A~B~C the similarity of C to A may be below the threshold; the
//     ledger reports it as measured.
//  3. one sequential pass over the id log and signature file (input order)
//     resolves order keys and kept ids and writes this run's key file.
//
// Memory per document: while scanning, nothing but write buffers (band
// keys, signatures of 4·permutations bytes, shingle sets under verify
// exact, and ids all go to temp files; they are read back sequentially or
// with positioned reads). During Reduce: 16 bytes per document for the one
// band being sorted (keys + radix scratch) when that fits the memory
// budget, else the external sort's budget; 4 bytes per document of
// union-find parents; maxHeads signatures; 16 bytes per removed document
// and the ids of kept documents with copies. So the resident state is
// about 20 bytes per document, and bounded by the budget plus 4 bytes per
// document when the budget is small. Disk: 8·bands + 4·permutations bytes
// per document (256 + 512 at the defaults) plus ids.
//
// verify: exact keeps the hashed shingle sets spilled in a temp file (there
// is no second pass over the text in the scan/reduce/apply contract), so it
// costs 8 bytes of disk per distinct shingle and one more read per
// comparison.
//
// Incremental runs: a previous run's key file holds the signatures (and,
// if that run verified exactly, shingle sets) and ids of its kept
// documents. They take indices 0..P-1, before this run's documents, so
// they win every cluster they join: this run's documents similar to them
// are removed "of" them. The previous run's text is never read. When this
// run verifies exactly but the previous key file has no shingle sets,
// pairs involving a previous-run document are verified by signatures.
//
// Key file PREFIX.sigs.zst (zstd stream), written atomically:
//
//	"WNWNKEY1", uvarint permutations, uvarint ngram, uint64 LE seed,
//	one flags byte (bit 0: shingle sets present), uvarint count;
//	then per kept document in input order: permutations × uint32 LE
//	signature values; if flagged, uvarint n and n uvarint deltas of the
//	sorted shingle hashes; uvarint len(id), id.
//
// Not implemented: re-verification of previous-run documents against each
// other (they were deduplicated by their own run), weighting of shingles.

import (
	"bufio"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
)

// Tuning constants of near-duplicate clustering.
const (
	// maxHeads bounds comparisons per member of a band group; 8 heads
	// catch groups mixing a few distinct clusters without quadratic cost.
	maxHeads = 8
	// nearKeysMagic starts a near-dedup key file.
	nearKeysMagic = "WNWNKEY1"
	// maxDocs is the number of documents a dense uint32 index can hold
	// (the low half of a band key).
	maxDocs = math.MaxUint32 - 1
)

// NearOptions configures a NearIndex.
type NearOptions struct {
	Permutations int     // k, signature length (default 128)
	NGram        int     // shingle length in words (default 5)
	Bands        int     // LSH bands; must divide Permutations (default 16)
	Threshold    float64 // similarity at or above which a candidate is a duplicate
	VerifyExact  bool    // verify candidates by exact Jaccard of shingle sets
	Seed         uint64  // permutation seed (the run seed)
	TempDir      string
	MemoryBudget int64
	Against      string // key-file prefix of a previous run ("" for none)
	KeysOut      string // key-file prefix for this run's kept keys ("" for none)
}

// NearKey is what Scan computes for one document.
type NearKey struct {
	Sig      []uint32 // MinHash signature
	Bands    []uint32 // band hashes
	Shingles []uint64 // sorted distinct shingle hashes (verify exact only)
}

// NearIndex finds near-duplicate documents added in input order.
type NearIndex struct {
	opt     NearOptions
	mh      *MinHasher
	band    Banding
	dir     string
	bands   *partLog[uint64] // this run's band keys, one file per band
	prevBd  *partLog[uint64] // previous run's band keys
	ids     *idLog
	cur     *recFile // this run's signature records
	prevRec *recFile // previous run's signature records
	prevN   uint32   // documents in the previous run's key file
	prevSh  bool     // previous key file has shingle sets
	n       uint32   // documents added
	last    uint64
	started bool
	reduced bool
	rm      removals
	stats   IndexStats
}

// NewNearIndex returns an empty index, checking a previous run's key file
// for presence and compatibility when opt.Against is set.
func NewNearIndex(opt NearOptions) (*NearIndex, error) {
	if opt.Permutations == 0 {
		opt.Permutations = 128
	}
	if opt.NGram == 0 {
		opt.NGram = 5
	}
	if opt.Bands == 0 {
		opt.Bands = 16
	}
	mh, err := NewMinHasher(opt.Permutations, opt.NGram, opt.Seed)
	if err != nil {
		return nil, err
	}
	bd, err := NewBanding(opt.Permutations, opt.Bands)
	if err != nil {
		return nil, err
	}
	x := &NearIndex{opt: opt, mh: mh, band: bd}
	if opt.Against != "" {
		h, err := readNearHeader(opt.Against + ".sigs.zst")
		if err != nil {
			return nil, err
		}
		if h.k != opt.Permutations || h.ngram != opt.NGram || h.seed != opt.Seed {
			return nil, fmt.Errorf("previous run keys %s.sigs.zst: signatures made with permutations=%d ngram=%d seed=%d, this run uses permutations=%d ngram=%d seed=%d; they are not comparable",
				opt.Against, h.k, h.ngram, h.seed, opt.Permutations, opt.NGram, opt.Seed)
		}
		if h.count > maxDocs/2 {
			return nil, fmt.Errorf("previous run keys %s.sigs.zst: %d documents is more than this index holds", opt.Against, h.count)
		}
		x.prevN, x.prevSh = uint32(h.count), h.shingles
	}
	dir, err := os.MkdirTemp(opt.TempDir, "winnow-near-*")
	if err != nil {
		return nil, fmt.Errorf("dedup: temp dir: %w", err)
	}
	x.dir = dir
	if x.ids, err = newIDLog(dir); err == nil {
		x.cur, err = newRecFile(dir, "sigs", opt.Permutations, opt.VerifyExact)
	}
	if err == nil {
		x.bands, err = newPartLog(&Uint64Codec, dir, "bands", bd.Bands)
	}
	if err != nil {
		x.Close()
		return nil, err
	}
	return x, nil
}

// MinHasher returns the index's signature function.
func (x *NearIndex) MinHasher() *MinHasher { return x.mh }

// Banding returns the index's banding.
func (x *NearIndex) Banding() Banding { return x.band }

// Key computes a document's signature, band hashes and (verify exact)
// shingle set. It returns nil for a text without words. Pure: safe for
// concurrent use.
func (x *NearIndex) Key(text string) *NearKey {
	sig, ok := x.mh.Signature(text, make([]uint32, 0, x.opt.Permutations))
	if !ok {
		return nil
	}
	k := &NearKey{Sig: sig, Bands: x.band.Hashes(sig, make([]uint32, 0, x.band.Bands))}
	if x.opt.VerifyExact {
		k.Shingles = SortedSet(x.mh.ShingleHashes(text, nil))
	}
	return k
}

// Add indexes one document's key (nil keys are ignored: nothing to
// compare). Documents must be added in input order.
func (x *NearIndex) Add(order uint64, id string, k *NearKey) error {
	if x.reduced {
		return errors.New("dedup: NearIndex.Add after Reduce")
	}
	if x.started && order <= x.last {
		return fmt.Errorf("dedup: documents out of input order (order key %d after %d)", order, x.last)
	}
	x.started, x.last = true, order
	if k == nil {
		return nil
	}
	if len(k.Sig) != x.opt.Permutations || len(k.Bands) != x.band.Bands {
		return fmt.Errorf("dedup: key of %d values / %d bands, want %d / %d", len(k.Sig), len(k.Bands), x.opt.Permutations, x.band.Bands)
	}
	if uint64(x.prevN)+uint64(x.n) >= maxDocs {
		return fmt.Errorf("dedup: near dedup holds at most %d documents", maxDocs)
	}
	idx := x.prevN + x.n
	if err := x.cur.append(k.Sig, k.Shingles); err != nil {
		return err
	}
	if err := x.ids.add(order, id); err != nil {
		return err
	}
	for b, h := range k.Bands {
		if err := x.bands.add(b, bandKey(h, idx)); err != nil {
			return err
		}
	}
	x.n++
	x.stats.Docs++
	return nil
}

// loaded is a document's signature (and shingles) read back for comparison.
type loaded struct {
	idx    uint32
	ok     bool
	sig    []uint32
	sh     []uint64
	hasSh  bool
	rawBuf []byte
}

func (x *NearIndex) load(l *loaded, idx uint32) error {
	l.idx, l.ok = idx, true
	f := x.cur
	i := int64(idx) - int64(x.prevN)
	if idx < x.prevN {
		f, i = x.prevRec, int64(idx)
	}
	var err error
	l.sig, l.sh, l.hasSh, l.rawBuf, err = f.read(i, l.sig[:0], l.sh[:0], l.rawBuf)
	return err
}

func (x *NearIndex) similarity(a, b *loaded) float64 {
	if x.opt.VerifyExact && a.hasSh && b.hasSh {
		return ExactJaccard(a.sh, b.sh)
	}
	return EstimateJaccard(a.sig, b.sig)
}

// Reduce clusters the documents. It is called once, after the last Add.
func (x *NearIndex) Reduce() (err error) {
	if x.reduced {
		return errors.New("dedup: NearIndex.Reduce called twice")
	}
	x.reduced = true
	if err := x.cur.flush(); err != nil {
		return err
	}
	if x.prevN > 0 {
		if err := x.loadPrev(); err != nil {
			return err
		}
	}
	if err := x.bands.flush(); err != nil {
		return err
	}
	total := x.prevN + x.n
	uf := NewUnionFind(int(total))
	g := grouper{x: x, uf: uf}
	budget := x.opt.MemoryBudget
	if budget <= 0 {
		budget = DefaultMemoryBudget
	}
	// One band at a time: 8 bytes per document for the band's keys plus 8
	// for the radix sort's scratch, or an external sort under the budget.
	inMemory := 16*int64(total) <= budget
	var keys, tmp []uint64
	if inMemory {
		keys, tmp = make([]uint64, 0, total), make([]uint64, total)
		x.stats.ResidentBytes = 16 * int64(total)
	}
	for b := 0; b < x.band.Bands; b++ {
		g.reset()
		if inMemory {
			var err error
			keys = keys[:0]
			if x.prevBd != nil {
				if keys, err = x.prevBd.read(b, keys); err != nil {
					return err
				}
			}
			if keys, err = x.bands.read(b, keys); err != nil {
				return err
			}
			x.stats.Records += int64(len(keys))
			sortBandKeys(keys, tmp[:len(keys)])
			for _, k := range keys {
				if err := g.add(k); err != nil {
					return err
				}
			}
			continue
		}
		if err := x.externalBand(b, &g); err != nil {
			return err
		}
	}
	keys, tmp = nil, nil

	// Removed documents, in input order.
	repOf := map[uint32]int32{}
	var root, member loaded
	seqs := make([]uint32, 0) // seq of each removal, parallel to x.rm.list
	for seq := uint32(0); seq < x.n; seq++ {
		u := x.prevN + seq
		r := uf.Find(u)
		if r == u {
			continue
		}
		if !root.ok || root.idx != r {
			if err := x.load(&root, r); err != nil {
				return err
			}
		}
		if err := x.load(&member, u); err != nil {
			return err
		}
		rep, ok := repOf[r]
		if !ok {
			rep = x.rm.addRep(uint64(r), r < x.prevN) // order filled below
			repOf[r] = rep
		}
		x.rm.add(0, rep, x.similarity(&root, &member))
		seqs = append(seqs, seq)
		if r < x.prevN {
			x.stats.RemovedPrev++
		}
	}
	x.stats.Removed = int64(len(x.rm.list))
	uf = nil

	if err := x.resolve(seqs); err != nil {
		return err
	}
	// resolve filled orders in input order, so the list is sorted already;
	// sort anyway to guard Lookup's binary search.
	x.rm.sort()
	return nil
}

// resolve makes one pass over the id log and signature file in input
// order: it fills the order keys of removed documents, the ids of this
// run's kept documents that copies point to, and writes the key file; then
// it reads ids of previous-run documents from the previous key file.
func (x *NearIndex) resolve(seqs []uint32) (err error) {
	// This run's reps, sorted by seq (their repInfo.order holds the index).
	need := x.rm.repsNeeded(false)
	var out *nearKeysOut
	if x.opt.KeysOut != "" {
		kept := uint64(x.n) - uint64(len(seqs))
		if out, err = createNearKeys(x.opt.KeysOut+".sigs.zst", x.opt.Permutations, x.opt.NGram, x.opt.Seed, x.opt.VerifyExact, kept); err != nil {
			return err
		}
		defer func() {
			if err != nil {
				out.abort()
			}
		}()
	}
	rd, err := x.ids.reader()
	if err != nil {
		return err
	}
	var l loaded
	ri, ni := 0, 0
	for seq := uint32(0); seq < x.n; seq++ {
		order, id, rerr := rd.next()
		if rerr != nil {
			return fmt.Errorf("dedup: id log: %w", rerr)
		}
		idx := uint64(x.prevN + seq)
		for ni < len(need) && x.rm.reps[need[ni]].order == idx {
			x.rm.reps[need[ni]].id = string(id)
			x.rm.reps[need[ni]].order = order
			ni++
		}
		if ri < len(seqs) && seqs[ri] == seq {
			x.rm.list[ri].order = order
			ri++
			continue
		}
		if out != nil {
			if err = x.load(&l, x.prevN+seq); err != nil {
				return err
			}
			if err = out.add(l.sig, l.sh, l.hasSh, id); err != nil {
				return err
			}
		}
	}
	x.ids.close()
	if prev := x.rm.repsNeeded(true); len(prev) > 0 {
		in, h, err := openNearKeys(x.opt.Against + ".sigs.zst")
		if err != nil {
			return err
		}
		defer in.close()
		pi := 0
		for j := uint64(0); j < h.count && pi < len(prev); j++ {
			_, _, _, id, err := in.nearRecord(h, nil, nil)
			if err != nil {
				return err
			}
			for pi < len(prev) && x.rm.reps[prev[pi]].order == j {
				x.rm.reps[prev[pi]].id = string(id)
				pi++
			}
		}
		if pi < len(prev) {
			return fmt.Errorf("previous run keys %s.sigs.zst: truncated", x.opt.Against)
		}
	}
	if out != nil {
		if err = out.commit(); err != nil {
			return fmt.Errorf("dedup: keys: %w", err)
		}
	}
	return nil
}

// loadPrev copies the previous run's signatures into a temp record file
// and adds their band keys with indices 0..P-1.
func (x *NearIndex) loadPrev() error {
	in, h, err := openNearKeys(x.opt.Against + ".sigs.zst")
	if err != nil {
		return err
	}
	defer in.close()
	if h.count != uint64(x.prevN) {
		return fmt.Errorf("previous run keys %s.sigs.zst: changed since the run started", x.opt.Against)
	}
	keepSh := x.opt.VerifyExact && h.shingles
	if x.prevRec, err = newRecFile(x.dir, "prev", x.opt.Permutations, keepSh); err != nil {
		return err
	}
	var sig []uint32
	var sh []uint64
	if x.prevBd, err = newPartLog(&Uint64Codec, x.dir, "prev-bands", x.band.Bands); err != nil {
		return err
	}
	bands := make([]uint32, 0, x.band.Bands)
	for j := uint32(0); j < x.prevN; j++ {
		var err error
		sig, sh, _, _, err = in.nearRecord(h, sig[:0], sh[:0])
		if err != nil {
			return err
		}
		if !keepSh {
			sh = nil
		}
		if err := x.prevRec.append(sig, sh); err != nil {
			return err
		}
		bands = x.band.Hashes(sig, bands[:0])
		for b, h := range bands {
			if err := x.prevBd.add(b, bandKey(h, j)); err != nil {
				return err
			}
		}
	}
	if err := x.prevBd.flush(); err != nil {
		return err
	}
	return x.prevRec.flush()
}

// Lookup returns why the document with the given order key was removed;
// ok is false when it is kept. Safe for concurrent use after Reduce.
func (x *NearIndex) Lookup(order uint64) (Match, bool) { return x.rm.lookup(order) }

// Stats returns counters of the index.
func (x *NearIndex) Stats() IndexStats { return x.stats }

// Close removes temp files.
func (x *NearIndex) Close() error {
	x.ids.close()
	x.cur.close()
	x.prevRec.close()
	x.bands.close()
	x.prevBd.close()
	var err error
	if x.dir != "" {
		if rerr := os.RemoveAll(x.dir); err == nil {
			err = rerr
		}
	}
	return err
}

// recFile holds fixed-width signature records (k × uint32 LE, then, with
// shingles, uint64 LE offset and uint32 LE count into a shingle file of
// uint64 LE hashes), written sequentially and read back by index.
type recFile struct {
	k       int
	withSh  bool
	size    int
	f, sf   *os.File
	w, sw   *bufio.Writer
	shOff   uint64
	buf     []byte
	flushed bool
}

func newRecFile(dir, name string, k int, withSh bool) (*recFile, error) {
	r := &recFile{k: k, withSh: withSh, size: 4 * k}
	var err error
	if r.f, err = os.CreateTemp(dir, name+"-*"); err != nil {
		return nil, fmt.Errorf("dedup: %w", err)
	}
	r.w = bufio.NewWriterSize(r.f, runWriteBuffer)
	if withSh {
		r.size += 12
		if r.sf, err = os.CreateTemp(dir, name+"-shingles-*"); err != nil {
			r.close()
			return nil, fmt.Errorf("dedup: %w", err)
		}
		r.sw = bufio.NewWriterSize(r.sf, runWriteBuffer)
	}
	r.buf = make([]byte, r.size)
	return r, nil
}

func (r *recFile) append(sig []uint32, sh []uint64) error {
	b := r.buf[:r.size]
	for i, v := range sig {
		binary.LittleEndian.PutUint32(b[4*i:], v)
	}
	if r.withSh {
		binary.LittleEndian.PutUint64(b[4*r.k:], r.shOff)
		binary.LittleEndian.PutUint32(b[4*r.k+8:], uint32(len(sh)))
		var eb [8]byte
		for _, h := range sh {
			binary.LittleEndian.PutUint64(eb[:], h)
			if _, err := r.sw.Write(eb[:]); err != nil {
				return err
			}
		}
		r.shOff += uint64(len(sh))
	}
	_, err := r.w.Write(b)
	return err
}

func (r *recFile) flush() error {
	r.flushed = true
	if err := r.w.Flush(); err != nil {
		return fmt.Errorf("dedup: signature file: %w", err)
	}
	if r.sw != nil {
		if err := r.sw.Flush(); err != nil {
			return fmt.Errorf("dedup: shingle file: %w", err)
		}
	}
	return nil
}

// read returns record i's signature and shingles, reusing the buffers.
func (r *recFile) read(i int64, sig []uint32, sh []uint64, raw []byte) ([]uint32, []uint64, bool, []byte, error) {
	if cap(raw) < r.size {
		raw = make([]byte, r.size)
	}
	raw = raw[:r.size]
	if _, err := r.f.ReadAt(raw, i*int64(r.size)); err != nil {
		return sig, sh, false, raw, fmt.Errorf("dedup: signature file record %d: %w", i, err)
	}
	for j := 0; j < r.k; j++ {
		sig = append(sig, binary.LittleEndian.Uint32(raw[4*j:]))
	}
	if !r.withSh {
		return sig, sh, false, raw, nil
	}
	off := binary.LittleEndian.Uint64(raw[4*r.k:])
	n := int(binary.LittleEndian.Uint32(raw[4*r.k+8:]))
	need := 8 * n
	if cap(raw) < r.size+need {
		nr := make([]byte, r.size+need)
		copy(nr, raw)
		raw = nr
	}
	sb := raw[r.size : r.size+need]
	if _, err := r.sf.ReadAt(sb, int64(off)*8); err != nil {
		return sig, sh, false, raw, fmt.Errorf("dedup: shingle file record %d: %w", i, err)
	}
	for j := 0; j < n; j++ {
		sh = append(sh, binary.LittleEndian.Uint64(sb[8*j:]))
	}
	return sig, sh, true, raw[:r.size], nil
}

func (r *recFile) close() {
	if r == nil {
		return
	}
	for _, f := range []*os.File{r.f, r.sf} {
		if f != nil {
			f.Close()
			os.Remove(f.Name())
		}
	}
	r.f, r.sf = nil, nil
}

type nearHeader struct {
	k, ngram int
	seed     uint64
	shingles bool
	count    uint64
}

func readNearHeader(path string) (nearHeader, error) {
	in, h, err := openNearKeys(path)
	if err != nil {
		return nearHeader{}, err
	}
	in.close()
	return h, nil
}

// openNearKeys opens a near key file and reads its header; the caller
// closes in, which is positioned at the first record.
func openNearKeys(path string) (*zstdIn, nearHeader, error) {
	in, err := openZstd(path, nearKeysMagic)
	if err != nil {
		return nil, nearHeader{}, err
	}
	h, err := in.nearHeader()
	if err != nil {
		in.close()
		return nil, nearHeader{}, err
	}
	return in, h, nil
}

func (in *zstdIn) nearHeader() (nearHeader, error) {
	var h nearHeader
	bad := func(err error) (nearHeader, error) {
		return h, fmt.Errorf("previous run keys %s: bad header: %w", in.path, err)
	}
	k, err := binary.ReadUvarint(in.r)
	if err != nil {
		return bad(err)
	}
	ng, err := binary.ReadUvarint(in.r)
	if err != nil {
		return bad(err)
	}
	var b [9]byte
	if _, err := io.ReadFull(in.r, b[:]); err != nil {
		return bad(err)
	}
	cnt, err := binary.ReadUvarint(in.r)
	if err != nil {
		return bad(err)
	}
	if k < 1 || k > maxPermutations || ng < 1 || ng > 1<<16 {
		return bad(fmt.Errorf("permutations %d, ngram %d", k, ng))
	}
	h = nearHeader{k: int(k), ngram: int(ng), seed: binary.LittleEndian.Uint64(b[:8]), shingles: b[8]&1 != 0, count: cnt}
	return h, nil
}

// nearRecord reads one record of a near key file.
func (in *zstdIn) nearRecord(h nearHeader, sig []uint32, sh []uint64) ([]uint32, []uint64, bool, []byte, error) {
	var vb [4]byte
	for i := 0; i < h.k; i++ {
		if _, err := io.ReadFull(in.r, vb[:]); err != nil {
			return sig, sh, false, nil, fmt.Errorf("previous run keys %s: truncated: %w", in.path, err)
		}
		sig = append(sig, binary.LittleEndian.Uint32(vb[:]))
	}
	if h.shingles {
		n, err := binary.ReadUvarint(in.r)
		if err != nil {
			return sig, sh, false, nil, fmt.Errorf("previous run keys %s: truncated: %w", in.path, err)
		}
		var acc uint64
		for i := uint64(0); i < n; i++ {
			d, err := binary.ReadUvarint(in.r)
			if err != nil {
				return sig, sh, false, nil, fmt.Errorf("previous run keys %s: truncated: %w", in.path, err)
			}
			acc += d
			sh = append(sh, acc)
		}
	}
	id, err := in.bytes()
	return sig, sh, h.shingles, id, err
}

// nearKeysOut writes a near key file.
type nearKeysOut struct{ zstdOut }

func createNearKeys(path string, k, ngram int, seed uint64, shingles bool, count uint64) (*nearKeysOut, error) {
	b := []byte(nearKeysMagic)
	b = binary.AppendUvarint(b, uint64(k))
	b = binary.AppendUvarint(b, uint64(ngram))
	b = binary.LittleEndian.AppendUint64(b, seed)
	var flags byte
	if shingles {
		flags = 1
	}
	b = append(b, flags)
	b = binary.AppendUvarint(b, count)
	o := &nearKeysOut{}
	if err := o.create(path, b); err != nil {
		return nil, err
	}
	return o, nil
}

func (o *nearKeysOut) add(sig []uint32, sh []uint64, hasSh bool, id []byte) error {
	b := o.b[:0]
	for _, v := range sig {
		b = binary.LittleEndian.AppendUint32(b, v)
	}
	if hasSh {
		b = binary.AppendUvarint(b, uint64(len(sh)))
		var prev uint64
		for _, h := range sh {
			b = binary.AppendUvarint(b, h-prev)
			prev = h
		}
	}
	b = binary.AppendUvarint(b, uint64(len(id)))
	b = append(b, id...)
	o.b = b
	_, err := o.w.Write(b)
	return err
}

// grouper walks one band's sorted keys and unions verified candidates.
// Heads are the earliest distinct members of the current group of equal
// band hashes (pool[:nh]); their buffers are reused from group to group.
type grouper struct {
	x         *NearIndex
	uf        *UnionFind
	pool      [maxHeads]loaded
	nh        int
	member    loaded
	groupHash uint32
	started   bool
}

func (g *grouper) reset() { g.nh, g.started = 0, false }

func (g *grouper) add(key uint64) error {
	x, uf := g.x, g.uf
	h, idx := splitBandKey(key)
	if !g.started || h != g.groupHash {
		g.started, g.groupHash = true, h
		g.nh = 0
	}
	if g.nh == 0 {
		g.pool[0].idx, g.pool[0].ok = idx, false // loaded only if a second member comes
		g.nh = 1
		return nil
	}
	root := uf.Find(idx)
	for i := 0; i < g.nh; i++ {
		if uf.Find(g.pool[i].idx) == root {
			return nil // already in this cluster
		}
	}
	if err := x.load(&g.member, idx); err != nil {
		return err
	}
	for i := 0; i < g.nh; i++ {
		hd := &g.pool[i]
		if !hd.ok {
			if err := x.load(hd, hd.idx); err != nil {
				return err
			}
		}
		x.stats.Candidates++
		if x.similarity(hd, &g.member) >= x.opt.Threshold {
			x.stats.Verified++
			uf.Union(hd.idx, idx)
			return nil
		}
	}
	if g.nh < maxHeads {
		g.pool[g.nh], g.member = g.member, g.pool[g.nh]
		g.nh++
	}
	return nil
}

// externalBand sorts one band's keys with an external Sorter under the
// memory budget and feeds them to g.
func (x *NearIndex) externalBand(b int, g *grouper) error {
	s := NewSorter(Uint64Codec, x.dir, x.opt.MemoryBudget)
	defer s.Close()
	if x.prevBd != nil {
		if err := x.prevBd.each(b, s.Add); err != nil {
			return err
		}
	}
	if err := x.bands.each(b, s.Add); err != nil {
		return err
	}
	x.stats.Records += s.Len()
	x.stats.Runs += s.Runs()
	x.stats.ResidentBytes = max(x.stats.ResidentBytes, s.ResidentBytes())
	it, err := s.Iterate()
	if err != nil {
		return err
	}
	defer it.Close()
	x.stats.SpilledBytes += s.SpilledBytes()
	for {
		k, ok := it.Next()
		if !ok {
			break
		}
		if err := g.add(k); err != nil {
			return err
		}
	}
	return it.Err()
}

// sortBandKeys sorts one band's keys by (hash, index). The keys arrive in
// index order, so a stable sort by the high 32 bits alone is enough: two
// 16-bit LSD radix passes through tmp (len(tmp) == len(keys)); small
// slices use a comparison sort (same result: keys are distinct).
func sortBandKeys(keys, tmp []uint64) {
	if len(keys) < 1<<14 {
		slices.Sort(keys)
		return
	}
	var count [1 << 16]int
	radixPass(keys, tmp, 32, &count)
	radixPass(tmp, keys, 48, &count)
}

func radixPass(src, dst []uint64, shift uint, count *[1 << 16]int) {
	clear(count[:])
	for _, k := range src {
		count[(k>>shift)&0xffff]++
	}
	pos := 0
	for i, c := range count {
		count[i] = pos
		pos += c
	}
	dst = dst[:len(src)]
	for _, k := range src {
		d := (k >> shift) & 0xffff
		dst[count[d]] = k
		count[d]++
	}
}
