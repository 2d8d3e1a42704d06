package stages

// Scan-key codecs of the global stages (KeyCodec): in a split run the keys
// Scan computed in one process are written to a file and decoded by the
// process that runs Collect. Every encoding is compact, little-endian and
// deterministic (the same keys give the same bytes), and a decoder
// consumes exactly the bytes of one key: truncated input, trailing bytes,
// out-of-range values and unsorted sets are errors, never panics.
//
// Formats (uvarint: encoding/binary's unsigned varint, the base-128
// varint of Protocol Buffers' wire format; fixedN: N bits
// little-endian; set64/set32: a sorted distinct set as uvarint count n,
// then, when n > 0, the first value as uvarint and each following value
// as uvarint of (value − previous − 1); count 0 is a nil set):
//
//	exact_dedup, scope document: 0x00 (nil) | 0x01 fixed64 Hi, fixed64 Lo, uvarint priority
//	exact_dedup, scope paragraph: set64 of paragraph hashes
//	near_dedup: 0x00 (nil) | 0x01 uvarint priority, fixed32 × permutations (signature), set64 of shingle hashes
//	            (band hashes are recomputed from the signature)
//	decontaminate: set32 of index keys (each below the index's key count)
//	domain: 0x00 (nil) | 0x01 fixed64 (IEEE 754 bits of the rank key)

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"

	"winnow/dedup"
)

// Tags of the keys that may be nil.
const (
	keyNil  = 0
	keySome = 1
)

var errKeysTruncated = errors.New("truncated")

// keyReader reads one encoded key; the first error sticks.
type keyReader struct {
	b   []byte
	err error
}

func (r *keyReader) fail(err error) {
	if r.err == nil {
		r.err = err
	}
}

func (r *keyReader) byte1() byte {
	if r.err != nil {
		return 0
	}
	if len(r.b) < 1 {
		r.fail(errKeysTruncated)
		return 0
	}
	c := r.b[0]
	r.b = r.b[1:]
	return c
}

func (r *keyReader) uvarint() uint64 {
	if r.err != nil {
		return 0
	}
	v, n := binary.Uvarint(r.b)
	switch {
	case n == 0:
		r.fail(errKeysTruncated)
		return 0
	case n < 0:
		r.fail(errors.New("varint overflows 64 bits"))
		return 0
	}
	r.b = r.b[n:]
	return v
}

func (r *keyReader) fixed32() uint32 {
	if r.err != nil {
		return 0
	}
	if len(r.b) < 4 {
		r.fail(errKeysTruncated)
		return 0
	}
	v := binary.LittleEndian.Uint32(r.b)
	r.b = r.b[4:]
	return v
}

func (r *keyReader) fixed64() uint64 {
	if r.err != nil {
		return 0
	}
	if len(r.b) < 8 {
		r.fail(errKeysTruncated)
		return 0
	}
	v := binary.LittleEndian.Uint64(r.b)
	r.b = r.b[8:]
	return v
}

// count reads a length of elements of at least minBytes bytes each and
// checks that the input can hold them (so garbage cannot ask for a huge
// allocation).
func (r *keyReader) count(minBytes int) int {
	n := r.uvarint()
	if r.err != nil {
		return 0
	}
	if n > uint64(len(r.b)/minBytes) {
		r.fail(fmt.Errorf("count %d exceeds the %d bytes left", n, len(r.b)))
		return 0
	}
	return int(n)
}

// set64 reads a sorted distinct set of uint64 (nil when empty).
func (r *keyReader) set64() []uint64 {
	n := r.count(1)
	if n == 0 || r.err != nil {
		return nil
	}
	out := make([]uint64, n)
	for i := range out {
		d := r.uvarint()
		if r.err != nil {
			return nil
		}
		if i == 0 {
			out[0] = d
			continue
		}
		prev := out[i-1]
		if d >= math.MaxUint64-prev {
			r.fail(fmt.Errorf("set value %d overflows 64 bits", i))
			return nil
		}
		out[i] = prev + d + 1
	}
	return out
}

// set32 reads a sorted distinct set of uint32, every value below limit
// (nil when empty).
func (r *keyReader) set32(limit uint64) []uint32 {
	n := r.count(1)
	if n == 0 || r.err != nil {
		return nil
	}
	out := make([]uint32, n)
	var v uint64
	for i := range out {
		d := r.uvarint()
		if r.err != nil {
			return nil
		}
		if i == 0 {
			v = d
		} else if d >= limit || v+d+1 >= limit {
			v = limit
		} else {
			v += d + 1
		}
		if v >= limit {
			r.fail(fmt.Errorf("value %d of the set is not below %d", i, limit))
			return nil
		}
		out[i] = uint32(v)
	}
	return out
}

// done reports the first error, or trailing bytes.
func (r *keyReader) done() error {
	if r.err == nil && len(r.b) > 0 {
		r.err = fmt.Errorf("%d trailing bytes", len(r.b))
	}
	return r.err
}

// appendSet64 appends a sorted distinct set (see set64). The caller
// guarantees the order (Scan's sets are sorted and distinct).
func appendSet64(b []byte, s []uint64) []byte {
	b = binary.AppendUvarint(b, uint64(len(s)))
	for i, v := range s {
		if i == 0 {
			b = binary.AppendUvarint(b, v)
		} else {
			b = binary.AppendUvarint(b, v-s[i-1]-1)
		}
	}
	return b
}

// appendSet32 appends a sorted distinct set (see set32).
func appendSet32(b []byte, s []uint32) []byte {
	b = binary.AppendUvarint(b, uint64(len(s)))
	for i, v := range s {
		if i == 0 {
			b = binary.AppendUvarint(b, uint64(v))
		} else {
			b = binary.AppendUvarint(b, uint64(v-s[i-1]-1))
		}
	}
	return b
}

// badKey reports a key of a type the stage's Scan does not return: a
// programming error of the caller, like a type assertion on it.
func badKey(stage string, keys any) string {
	return fmt.Sprintf("%s: AppendKeys of a %T, not a key of this stage's Scan", stage, keys)
}

func keysError(stage string, err error) error {
	return fmt.Errorf("%s: decoding scan keys: %w", stage, err)
}

// AppendKeys appends the encoding of a Scan result of the stage to b.
func (s *exactDedupStage) AppendKeys(b []byte, keys any) []byte {
	if s.paragraph {
		if keys == nil {
			return appendSet64(b, nil)
		}
		hs, ok := keys.([]uint64)
		if !ok {
			panic(badKey(s.name, keys))
		}
		return appendSet64(b, hs)
	}
	if keys == nil {
		return append(b, keyNil)
	}
	k, ok := keys.(exactKey)
	if !ok {
		panic(badKey(s.name, keys))
	}
	b = append(b, keySome)
	b = binary.LittleEndian.AppendUint64(b, k.hash.Hi)
	b = binary.LittleEndian.AppendUint64(b, k.hash.Lo)
	return binary.AppendUvarint(b, k.priority)
}

// DecodeKeys decodes what AppendKeys wrote.
func (s *exactDedupStage) DecodeKeys(b []byte) (any, error) {
	r := keyReader{b: b}
	if s.paragraph {
		hs := r.set64()
		if err := r.done(); err != nil {
			return nil, keysError(s.name, err)
		}
		if hs == nil {
			return nil, nil
		}
		return hs, nil
	}
	switch tag := r.byte1(); {
	case r.err != nil:
	case tag == keyNil:
		if err := r.done(); err != nil {
			return nil, keysError(s.name, err)
		}
		return nil, nil
	case tag != keySome:
		r.fail(fmt.Errorf("tag %d, want 0 or 1", tag))
	}
	var k exactKey
	k.hash.Hi = r.fixed64()
	k.hash.Lo = r.fixed64()
	k.priority = r.uvarint()
	if err := r.done(); err != nil {
		return nil, keysError(s.name, err)
	}
	return k, nil
}

// AppendKeys appends the encoding of a Scan result of the stage to b.
// The band hashes are not stored: DecodeKeys recomputes them from the
// signature.
func (s *nearDedupStage) AppendKeys(b []byte, keys any) []byte {
	if keys == nil {
		return append(b, keyNil)
	}
	k, ok := keys.(*dedup.NearKey)
	if !ok {
		panic(badKey(s.name, keys))
	}
	if k == nil {
		return append(b, keyNil)
	}
	b = append(b, keySome)
	b = binary.AppendUvarint(b, k.Priority)
	b = binary.AppendUvarint(b, uint64(len(k.Sig)))
	for _, v := range k.Sig {
		b = binary.LittleEndian.AppendUint32(b, v)
	}
	return appendSet64(b, k.Shingles)
}

// DecodeKeys decodes what AppendKeys wrote; a signature must have the
// stage's number of permutations.
func (s *nearDedupStage) DecodeKeys(b []byte) (any, error) {
	r := keyReader{b: b}
	switch tag := r.byte1(); {
	case r.err != nil:
	case tag == keyNil:
		if err := r.done(); err != nil {
			return nil, keysError(s.name, err)
		}
		return nil, nil
	case tag != keySome:
		r.fail(fmt.Errorf("tag %d, want 0 or 1", tag))
	}
	k := &dedup.NearKey{Priority: r.uvarint()}
	n := r.count(4)
	if r.err == nil && (n != s.opt.Permutations || s.band.Bands <= 0 || n%s.band.Bands != 0) {
		r.fail(fmt.Errorf("signature of %d values, want %d", n, s.opt.Permutations))
	}
	if r.err == nil {
		k.Sig = make([]uint32, n)
		for i := range k.Sig {
			k.Sig[i] = r.fixed32()
		}
	}
	k.Shingles = r.set64()
	if err := r.done(); err != nil {
		return nil, keysError(s.name, err)
	}
	k.Bands = s.band.Hashes(k.Sig, make([]uint32, 0, s.band.Bands))
	return k, nil
}

// AppendKeys appends the encoding of a Scan result of the stage to b.
func (d *Decontaminate) AppendKeys(b []byte, keys any) []byte {
	if keys == nil {
		return appendSet32(b, nil)
	}
	ks, ok := keys.([]uint32)
	if !ok {
		panic(badKey(d.name, keys))
	}
	return appendSet32(b, ks)
}

// DecodeKeys decodes what AppendKeys wrote; every key must be a key of
// the stage's index.
func (d *Decontaminate) DecodeKeys(b []byte) (any, error) {
	r := keyReader{b: b}
	ks := r.set32(uint64(d.idx.KeyCount()))
	if err := r.done(); err != nil {
		return nil, keysError(d.name, err)
	}
	if ks == nil {
		return nil, nil
	}
	return ks, nil
}

// AppendKeys appends the encoding of a Scan result of the stage to b.
func (s *domainStage) AppendKeys(b []byte, keys any) []byte {
	if keys == nil {
		return append(b, keyNil)
	}
	key, ok := keys.(float64)
	if !ok {
		panic(badKey(s.name, keys))
	}
	b = append(b, keySome)
	return binary.LittleEndian.AppendUint64(b, math.Float64bits(key))
}

// DecodeKeys decodes what AppendKeys wrote.
func (s *domainStage) DecodeKeys(b []byte) (any, error) {
	r := keyReader{b: b}
	tag := r.byte1()
	if r.err == nil && tag == keyNil {
		if err := r.done(); err != nil {
			return nil, keysError(s.name, err)
		}
		return nil, nil
	}
	if r.err == nil && tag != keySome {
		r.fail(fmt.Errorf("tag %d, want 0 or 1", tag))
	}
	v := math.Float64frombits(r.fixed64())
	if err := r.done(); err != nil {
		return nil, keysError(s.name, err)
	}
	return v, nil
}

// The global stages that store their scan keys between phases.
var (
	_ KeyCodec = (*exactDedupStage)(nil)
	_ KeyCodec = (*nearDedupStage)(nil)
	_ KeyCodec = (*Decontaminate)(nil)
	_ KeyCodec = (*domainStage)(nil)
)
