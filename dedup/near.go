package dedup

// Near-duplicate detection: MinHash signatures (minhash.go, Broder 1997),
// LSH banding (lsh.go), candidate pairs found per band-key partition and
// verified, then one greedy pass in keep-priority order (near_pairs.go).
//
// Scan (NearIndex.Key, pure, any goroutine) computes a document's
// signature and its band hashes; the caller may set the key's keep
// Priority (keep.go). Add (input order, one goroutine) gives the document
// the next dense index, appends its signature record to a temp file, its
// (order key, id) to the id log, its priority to a priority log, and one
// packed band key (bandHash<<32 | index) per band to the partition file
// that the band hash falls in (KeyPartitions = 64 hash ranges, fixed: the
// same for any number of workers or processes). Reduce:
//
//  1. ranks the documents by (priority, input order) — the identity when
//     every priority is equal (keep: first) — with previous-run documents
//     ranked before all of this run's;
//  2. takes the partitions one at a time, sorts their keys by (band hash,
//     rank), and in every bucket of equal band hashes compares each
//     member with the first BucketCap (8) members of the bucket, its
//     heads; a pair is verified when the estimated Jaccard (fraction of
//     equal signature values) — or under verify exact the exact Jaccard of
//     the hashed shingle sets — is >= threshold. Verified pairs (later
//     rank, earlier rank, similarity) go to an external sort. Partitions
//     share no bucket, so they could run anywhere, in any order;
//  3. walks the verified pairs in rank order: a document is removed when
//     it has a verified pair with an earlier-ranked document that was
//     kept, "of" the best-ranked such document. So every removed document
//     points at a kept document at least threshold-similar to it (no
//     chains A~B~C where C is far from A); a document whose only similar
//     partners were themselves removed is kept;
//  4. one sequential pass over the id log and signature file (input order)
//     resolves order keys and kept ids and writes this run's key file.
//
// The heads bound the work of big buckets (thousands of mirrored pages
// sharing a band): a bucket of m members costs at most BucketCap·m
// comparisons, not m²/2. The price is recall: a member similar only to a
// non-head member of every bucket it is in is missed. docs/dedup.md gives
// the measured effect.
//
// Memory per document: while scanning, nothing but write buffers (band
// keys, signatures of 4·permutations bytes, priorities, shingle sets under
// verify exact, and ids all go to temp files, read back sequentially or
// with positioned reads). During Reduce: 16 bytes per band key of the one
// partition being sorted (bands/64 keys per document: 4 bytes per document
// at the defaults) when that fits 3/4 of the memory budget, else an
// external sort within it; the verified pairs (16 bytes each in memory) in
// an external sort within the other quarter; 1 bit per document
// (removed); 8-16 bytes per document of verified-pair table (at most 1/16
// of the budget); 8 bytes per document of rank tables only when
// priorities differ; BucketCap signatures; 12 bytes per removed document
// and the ids of kept documents with copies. Disk: 8·bands +
// 4·permutations + 8 bytes per document (128 + 512 + 8 at the defaults)
// plus ids and 10 bytes per verified pair.
//
// verify: exact keeps the hashed shingle sets spilled in a temp file (there
// is no second pass over the text in the scan/reduce/apply contract), so it
// costs 8 bytes of disk per distinct shingle and one more read per
// comparison.
//
// Incremental runs: a previous run's key file holds the signatures (and,
// if that run verified exactly, shingle sets) and ids of its kept
// documents. They take indices and ranks 0..P-1, before this run's
// documents, are never removed and never compared with each other, so
// this run's documents similar to them are removed "of" them. The
// previous run's text is never read. When this run verifies exactly but
// the previous key file has no shingle sets, pairs involving a
// previous-run document are verified by signatures.
//
// Key file PREFIX.sigs.zst (zstd stream), written atomically:
//
//	"WNWNKEY1", uvarint permutations, uvarint ngram, uint64 LE seed,
//	one flags byte (bit 0: shingle sets present), uvarint count;
//	then per kept document in input order: permutations × uint32 LE
//	signature values; if flagged, uvarint n and n uvarint deltas of the
//	sorted shingle hashes; uvarint len(id), id.
//
// A split run finds the pairs of the partitions in separate processes and
// makes the greedy pass once over all of them (near_split.go).
//
// Not implemented: re-verification of previous-run documents against each
// other (they were deduplicated by their own run), weighting of shingles,
// running the partitions in parallel.

import (
	"bufio"
	"cmp"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
)

// Tuning constants of near-duplicate detection.
const (
	// KeyPartitions is the number of hash partitions of band keys (near
	// dedup) and hashes (exact dedup). It is fixed, not derived from the
	// worker count, so decisions never depend on how the reduce is split;
	// 64 partitions keep one partition's keys at 1/64 of the total.
	KeyPartitions = 64
	// DefaultBucketCap bounds the heads each member of a band bucket is
	// compared with; 8 heads catch buckets mixing a few distinct clusters
	// without quadratic cost (recall measured in docs/dedup.md).
	DefaultBucketCap = 8
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
	// Partitions is the number of band-key partitions (default
	// KeyPartitions). Decisions do not depend on it; tests vary it.
	Partitions int
	// BucketCap is the number of heads per bucket (default
	// DefaultBucketCap); larger values trade time for recall.
	BucketCap int
}

// NearKey is what Scan computes for one document.
type NearKey struct {
	Sig      []uint32 // MinHash signature
	Bands    []uint32 // band hashes
	Shingles []uint64 // sorted distinct shingle hashes (verify exact only)
	// Priority is the keep priority (KeepRule.Priority): of similar
	// documents the lowest is kept, ties by input order. Set by the caller.
	Priority uint64
}

// NearIndex finds near-duplicate documents added in input order.
type NearIndex struct {
	opt      NearOptions
	mh       *MinHasher
	band     Banding
	dir      string
	bands    *partLog[uint64] // this run's band keys, one file per partition
	prevBd   *partLog[uint64] // previous run's band keys
	prios    *partLog[uint64] // this run's priorities, in input order
	ids      *idLog
	cur      *recFile // this run's signature records
	prevRec  *recFile // previous run's signature records
	prevN    uint32   // documents in the previous run's key file
	prevSh   bool     // previous key file has shingle sets
	n        uint32   // documents added
	prio0    uint64   // priority of the first document
	prioDiff bool     // some priorities differ (rank != index)
	perm     []uint32 // rank → index (nil: identity)
	rank     []uint32 // index → rank (nil: identity)
	last     uint64
	started  bool
	reduced  bool
	rm       removals
	stats    IndexStats
	// only, when not nil, marks the band-key partitions this index
	// reduces (RestrictPartitions); band keys of the others are skipped.
	only     []bool
	onlyList []int
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
	if opt.Partitions <= 0 {
		opt.Partitions = KeyPartitions
	}
	if opt.BucketCap <= 0 {
		opt.BucketCap = DefaultBucketCap
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
		x.bands, err = newPartLog(&Uint64Codec, dir, "bands", opt.Partitions)
	}
	if err == nil {
		x.prios, err = newPartLog(&Uint64Codec, dir, "prios", 1)
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

// partition returns the partition of a band hash: contiguous hash ranges,
// so any partition count splits the same buckets.
func (x *NearIndex) partition(h uint32) int {
	return int(uint64(h) * uint64(x.opt.Partitions) >> 32)
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
	if x.n == 0 {
		x.prio0 = k.Priority
	} else if k.Priority != x.prio0 {
		x.prioDiff = true
	}
	if err := x.prios.add(0, k.Priority); err != nil {
		return err
	}
	for _, h := range k.Bands {
		p := x.partition(h)
		if x.only != nil && !x.only[p] {
			continue // another task reduces this partition (near_split.go)
		}
		if err := x.bands.add(p, bandKey(h, idx)); err != nil {
			return err
		}
	}
	x.n++
	x.stats.Docs++
	return nil
}

// loaded is a document's signature (and shingles) read back for comparison.
type loaded struct {
	rank   uint32 // the document's rank (bucket walk)
	ok     bool   // sig (and sh) hold the document's record
	sig    []uint32
	sh     []uint64
	hasSh  bool
	rawBuf []byte
}

// load reads the record of the document with the given dense index.
func (x *NearIndex) load(l *loaded, idx uint32) error {
	l.ok = true
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

// Reduce decides which documents are near copies. It is called once,
// after the last Add.
func (x *NearIndex) Reduce() (err error) {
	if x.reduced {
		return errors.New("dedup: NearIndex.Reduce called twice")
	}
	x.reduced = true
	if err := x.cur.flush(); err != nil {
		return err
	}
	if err := x.prios.flush(); err != nil {
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
	if err := x.rankDocs(); err != nil {
		return err
	}
	// The pair sort holds a quarter of the budget while the partitions
	// are walked with the rest, so together they stay within it.
	pairs := NewSorter(pairCodec, x.dir, max(x.budget()/4, 1))
	defer pairs.Close()
	w := newBucketWalker(x, pairs)
	for p := 0; p < x.opt.Partitions; p++ {
		if err := x.walkPartition(p, w); err != nil {
			return err
		}
	}
	rms, err := x.greedy(pairs)
	if err != nil {
		return err
	}
	x.rank = nil

	// Removed documents, in input order, each pointing at its kept
	// document (rep entries hold the kept index until resolve).
	for i := range rms {
		rms[i].doc, rms[i].kept = x.indexOf(rms[i].doc), x.indexOf(rms[i].kept)
	}
	x.perm = nil
	slices.SortFunc(rms, func(a, b rmRank) int { return cmp.Compare(a.doc, b.doc) })
	repOf := map[uint32]int32{}
	seqs := make([]uint32, 0, len(rms))
	for _, r := range rms {
		rep, ok := repOf[r.kept]
		if !ok {
			rep = x.rm.addRep(uint64(r.kept), r.kept < x.prevN) // order filled by resolve
			repOf[r.kept] = rep
		}
		x.rm.list = append(x.rm.list, removal{rep: rep, sim: r.sim})
		seqs = append(seqs, r.doc-x.prevN)
		if r.kept < x.prevN {
			x.stats.RemovedPrev++
		}
	}
	x.stats.Removed = int64(len(x.rm.list))
	if err := x.resolve(seqs); err != nil {
		return err
	}
	// resolve filled orders in input order, so the list is sorted already;
	// sort anyway to guard Lookup's binary search.
	x.rm.sort()
	return nil
}

func (x *NearIndex) budget() int64 {
	if x.opt.MemoryBudget <= 0 {
		return DefaultMemoryBudget
	}
	return x.opt.MemoryBudget
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
	if x.prevBd, err = newPartLog(&Uint64Codec, x.dir, "prev-bands", x.opt.Partitions); err != nil {
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
		for _, h := range bands {
			p := x.partition(h)
			if x.only != nil && !x.only[p] {
				continue
			}
			if err := x.prevBd.add(p, bandKey(h, j)); err != nil {
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
	x.prios.close()
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
