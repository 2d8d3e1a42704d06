package synth

import (
	"encoding/hex"
	"fmt"
	"os"
	"path/filepath"
	"strconv"

	"winnow/stages/jsonl"

	"github.com/klauspost/compress/gzip"
	"github.com/zeebo/xxh3"

	"winnow/stages/fsio"
)

// Corpus file formats. Every format carries the same documents for the same
// seed; only the container differs.
//
//   - jsonl.zst, jsonl.gz: one JSON object per line,
//     {"id","text","url","date"}, compressed as one stream.
//   - warc: WARC/1.1 (ISO 28500) file, one gzip member per record (the
//     usual ".warc.gz" layout): a leading warcinfo record, then one
//     conversion record per document with WARC-Record-ID, WARC-Date,
//     WARC-Target-URI, Content-Type and Content-Length; the block is the
//     document text. The record id is derived from the seed and document
//     id and listed in TruthDoc.RecordID.
//   - txt: one UTF-8 file per document, Dir/<source>/<id>.txt (ids sort
//     in corpus order). Documents contain blank lines between paragraphs,
//     so a blank-line-separated layout could not hold them; read txt
//     corpora with one document per file. Options.Files does not apply.
const (
	FormatJSONLZstd = "jsonl.zst"
	FormatJSONLGzip = "jsonl.gz"
	FormatTxt       = "txt"
	FormatWARC      = "warc"
)

// Formats lists the accepted Options.Format values.
var Formats = []string{FormatJSONLZstd, FormatJSONLGzip, FormatTxt, FormatWARC}

// fileExt returns the corpus-file suffix of a format ("" for txt, whose
// documents are files of their own).
func fileExt(format string) string {
	switch format {
	case FormatJSONLGzip:
		return ".jsonl.gz"
	case FormatWARC:
		return ".warc.gz"
	case FormatTxt:
		return ""
	}
	return ".jsonl.zst"
}

// corpusWriter writes documents of one corpus file.
type corpusWriter interface {
	// write adds rec and returns the path, relative to the corpus
	// directory, of the file that holds it.
	write(rec *record) (string, error)
	// raw is the number of uncompressed bytes written so far.
	raw() int64
	commit() error
	abort()
}

func newCorpusWriter(format, dir, rel string, seed uint64) (corpusWriter, error) {
	path := filepath.Join(dir, rel)
	switch format {
	case FormatJSONLZstd:
		z, err := fsio.CreateZstd(path)
		if err != nil {
			return nil, err
		}
		return newJSONLWriter(rel, func(b []byte) error { _, err := z.Write(b); return err }, z.Commit, z.Abort), nil
	case FormatJSONLGzip:
		a, err := fsio.CreateAtomic(path)
		if err != nil {
			return nil, err
		}
		gz, err := gzip.NewWriterLevel(a, gzip.DefaultCompression)
		if err != nil {
			a.Abort()
			return nil, err
		}
		return newJSONLWriter(rel, func(b []byte) error { _, err := gz.Write(b); return err },
			func() error {
				if err := gz.Close(); err != nil {
					a.Abort()
					return err
				}
				return a.Commit()
			}, a.Abort), nil
	case FormatWARC:
		a, err := fsio.CreateAtomic(path)
		if err != nil {
			return nil, err
		}
		w := &warcWriter{rel: rel, f: a, seed: seed}
		w.p = newPipe(w.member)
		if err := w.info(filepath.Base(rel)); err != nil {
			w.abort()
			return nil, err
		}
		return w, nil
	case FormatTxt:
		return newTxtWriter(dir, rel)
	}
	return nil, fmt.Errorf("unknown format %q (want one of jsonl.zst, jsonl.gz, txt, warc)", format)
}

// jsonlWriter writes JSON lines into a compressing stream fed by a pipe.
type jsonlWriter struct {
	rel     string
	p       *pipe
	n       int64
	closeFn func() error
	abortFn func()
}

func newJSONLWriter(rel string, write func([]byte) error, closeFn func() error, abortFn func()) *jsonlWriter {
	return &jsonlWriter{rel: rel, p: newPipe(write), closeFn: closeFn, abortFn: abortFn}
}

func (j *jsonlWriter) write(rec *record) (string, error) {
	b := j.p.buf()
	n0 := len(b)
	b = append(b, `{"id":`...)
	b = jsonl.AppendString(b, rec.id)
	b = append(b, `,"text":`...)
	b = jsonl.AppendString(b, rec.text)
	b = append(b, `,"url":`...)
	b = jsonl.AppendString(b, rec.url)
	b = append(b, `,"date":`...)
	b = jsonl.AppendString(b, rec.date)
	b = append(b, '}', '\n')
	j.n += int64(len(b) - n0)
	j.p.commit(b)
	return j.rel, nil
}

func (j *jsonlWriter) raw() int64 { return j.n }
func (j *jsonlWriter) commit() error {
	if err := j.p.close(); err != nil {
		j.abortFn()
		return fmt.Errorf("write %s: %w", j.rel, err)
	}
	if err := j.closeFn(); err != nil {
		return fmt.Errorf("finish %s: %w", j.rel, err)
	}
	return nil
}
func (j *jsonlWriter) abort() { j.p.close(); j.abortFn() }

// warcWriter writes one gzip member per WARC record.
type warcWriter struct {
	rel  string
	f    *fsio.AtomicFile
	gz   *gzip.Writer // used by the pipe's goroutine only
	p    *pipe
	seed uint64
	n    int64
}

// recordID returns a deterministic "urn:uuid:..." for key: an xxh3-128
// digest of the seed and key with the version 4 and variant bits set.
func recordID(seed uint64, key string) string {
	var kb []byte
	kb = strconv.AppendUint(kb, seed, 10)
	kb = append(kb, '/')
	kb = append(kb, key...)
	d := xxh3.Hash128(kb).Bytes()
	d[6] = d[6]&0x0f | 0x40
	d[8] = d[8]&0x3f | 0x80
	var h [32]byte
	hex.Encode(h[:], d[:])
	return "urn:uuid:" + string(h[0:8]) + "-" + string(h[8:12]) + "-" + string(h[12:16]) + "-" +
		string(h[16:20]) + "-" + string(h[20:32])
}

// warcDate is the fixed date of warcinfo records, so files stay identical
// across runs.
const warcDate = "2024-01-01T00:00:00Z"

// record serializes one WARC record and hands it to the pipe as one unit,
// which member compresses into its own gzip member.
func (w *warcWriter) record(typ, id, date, uri, ctype string, block []byte, extra [][2]string) {
	h := w.p.buf()
	n0 := len(h)
	h = append(h, "WARC/1.1\r\nWARC-Type: "...)
	h = append(h, typ...)
	h = append(h, "\r\nWARC-Record-ID: <"...)
	h = append(h, id...)
	h = append(h, ">\r\nWARC-Date: "...)
	h = append(h, date...)
	if uri != "" {
		h = append(h, "\r\nWARC-Target-URI: "...)
		h = append(h, uri...)
	}
	for _, kv := range extra {
		h = append(h, "\r\n"...)
		h = append(h, kv[0]...)
		h = append(h, ": "...)
		h = append(h, kv[1]...)
	}
	h = append(h, "\r\nContent-Type: "...)
	h = append(h, ctype...)
	h = append(h, "\r\nContent-Length: "...)
	h = strconv.AppendInt(h, int64(len(block)), 10)
	h = append(h, "\r\n\r\n"...)
	h = append(h, block...)
	h = append(h, "\r\n\r\n"...)
	w.n += int64(len(h) - n0)
	w.p.cur = h
	w.p.send()
}

// member writes one record as a gzip member (on the pipe's goroutine).
func (w *warcWriter) member(rec []byte) error {
	if w.gz == nil {
		gz, err := gzip.NewWriterLevel(w.f, gzip.DefaultCompression)
		if err != nil {
			return err
		}
		w.gz = gz
	} else {
		w.gz.Reset(w.f)
	}
	if _, err := w.gz.Write(rec); err != nil {
		return err
	}
	return w.gz.Close()
}

func (w *warcWriter) info(filename string) error {
	block := []byte("software: winnow gen (synthetic Larkspur Marine Works corpus)\r\n" +
		"format: WARC File Format 1.1\r\n" +
		"description: invented documents for pipeline tests and benchmarks\r\n")
	w.record("warcinfo", recordID(w.seed, "warcinfo/"+filename), warcDate, "",
		"application/warc-fields", block, [][2]string{{"WARC-Filename", filename}})
	return nil
}

func (w *warcWriter) write(rec *record) (string, error) {
	w.record("conversion", rec.recordID, rec.date, rec.url, "text/plain; charset=utf-8", rec.text, nil)
	return w.rel, nil
}

func (w *warcWriter) raw() int64 { return w.n }
func (w *warcWriter) commit() error {
	if err := w.p.close(); err != nil {
		w.f.Abort()
		return fmt.Errorf("write %s: %w", w.rel, err)
	}
	if err := w.f.Commit(); err != nil {
		return fmt.Errorf("finish %s: %w", w.rel, err)
	}
	return nil
}
func (w *warcWriter) abort() { w.p.close(); w.f.Abort() }

// txtWriter writes one file per document, Dir/<source>/<id>.txt. Each
// file is written under a temporary name and renamed, so a reader never
// sees half a document; files are not synced one by one (a corpus has
// hundreds of thousands of them), truth.jsonl is the commit point.
type txtWriter struct {
	dir, src string
	n        int64
}

func newTxtWriter(dir, rel string) (*txtWriter, error) {
	src := filepath.Dir(filepath.FromSlash(rel))
	if err := os.MkdirAll(filepath.Join(dir, src), 0o755); err != nil {
		return nil, err
	}
	return &txtWriter{dir: dir, src: src}, nil
}

func (t *txtWriter) write(rec *record) (string, error) {
	name := rec.id + ".txt"
	final := filepath.Join(t.dir, t.src, name)
	tmp := filepath.Join(t.dir, t.src, ".tmp-"+name)
	if err := os.WriteFile(tmp, rec.text, 0o644); err != nil {
		os.Remove(tmp)
		return "", fmt.Errorf("write %s: %w", final, err)
	}
	if err := os.Rename(tmp, final); err != nil {
		os.Remove(tmp)
		return "", fmt.Errorf("write %s: %w", final, err)
	}
	t.n += int64(len(rec.text))
	return filepath.ToSlash(filepath.Join(t.src, name)), nil
}

func (t *txtWriter) raw() int64    { return t.n }
func (t *txtWriter) commit() error { return nil }
func (t *txtWriter) abort()        {}
