package record

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"sync/atomic"
	"time"

	"winnow/stages"
	"winnow/stages/fsio"
	"winnow/stages/read"
)

// Manifest is OUT/manifest.json: the run's provenance. Field names are a
// contract (see README "Run directory"). Nothing in it depends on the
// number of workers; only the "seconds" fields vary between runs.
type Manifest struct {
	ToolVersion string         `json:"tool_version"`
	Name        string         `json:"name"`
	Config      any            `json:"config"`
	ConfigHash  string         `json:"config_hash"`
	Seed        uint64         `json:"seed"`
	Inputs      []InputSummary `json:"inputs"`
	Stages      []*Counters    `json:"stages"`
	Outputs     []OutputFile   `json:"outputs"`
	Mix         any            `json:"mix,omitempty"`
	Totals      Totals         `json:"totals"`
	Errors      []RunError     `json:"errors"`
	ErrorCount  int64          `json:"error_count"`
	// InternalErrors counts documents a stage panicked on (rule
	// internal_error in the ledger; each listed in Errors with its stack).
	InternalErrors int64 `json:"internal_errors"`
	// DuplicateIDs counts documents whose id an earlier document already
	// had (compared by 64-bit hash); `explain` shows all of them.
	// DuplicateCheckStopped, when set, is the number of ids after which
	// the check stopped to stay within memory.
	DuplicateIDs          int64 `json:"duplicate_ids"`
	DuplicateCheckStopped int64 `json:"duplicate_check_stopped,omitempty"`
	// ReadSkips sums the inputs' Skips: records passed over by rule.
	ReadSkips map[string]int64 `json:"read_skips,omitempty"`
	// Interrupted is true when the run was stopped before the end; the
	// ledger holds every decision made until then.
	Interrupted bool    `json:"interrupted"`
	Seconds     float64 `json:"seconds"`
}

// Totals sums a run.
type Totals struct {
	InputFiles int64 `json:"input_files"`
	InputBytes int64 `json:"input_bytes"`
	DocsIn     int64 `json:"docs_in"`
	// DocsOut counts the documents of which at least one piece is in the
	// shards; RecordsOut the shard lines (a document split into pieces, or
	// repeated by max_epochs, is several lines).
	DocsOut    int64 `json:"docs_out"`
	RecordsOut int64 `json:"records_out"`
	BytesOut   int64 `json:"bytes_out"`
	TokensOut  int64 `json:"tokens_out"`
}

// Counters are a stage's document flow, written to the manifest.
type Counters struct {
	Name      string `json:"name"`
	Kind      string `json:"kind"`
	DocsIn    int64  `json:"docs_in"`
	DocsOut   int64  `json:"docs_out"`
	BytesIn   int64  `json:"bytes_in"`
	BytesOut  int64  `json:"bytes_out"`
	TokensOut int64  `json:"tokens_out,omitempty"`
	// RecordsOut (write stage only) counts the shard lines written: pieces
	// of split documents and repeats each count (docs_out counts documents).
	RecordsOut int64 `json:"records_out,omitempty"`
	Dropped    int64 `json:"dropped"`
	Edited     int64 `json:"edited"`
	// Skipped counts the documents outside the stage's `only:` scope:
	// they passed it untouched (they are in DocsIn and DocsOut) and it
	// did not measure them.
	Skipped int64   `json:"skipped,omitempty"`
	Seconds float64 `json:"seconds"`
	// Files are the files the stage wrote into the run directory (a
	// domain stage's model), with their hashes.
	Files []stages.StageFile `json:"files,omitempty"`
	// Global is true for a stage that ran as a global stage (it saw every
	// document before deciding); audit and what-if rely on it.
	Global bool `json:"global,omitempty"`
	nanos  atomic.Int64
}

// Snapshot copies the counts (not the running time) of c.
func (c *Counters) Snapshot() *Counters {
	return &Counters{Name: c.Name, Kind: c.Kind, DocsIn: c.DocsIn, DocsOut: c.DocsOut, BytesIn: c.BytesIn,
		BytesOut: c.BytesOut, TokensOut: c.TokensOut, RecordsOut: c.RecordsOut, Dropped: c.Dropped, Edited: c.Edited, Skipped: c.Skipped, Seconds: c.Seconds, Files: c.Files, Global: c.Global}
}

// RunError is an input problem recorded in the manifest.
type RunError struct {
	File   string `json:"file"`
	Line   int64  `json:"line,omitempty"`
	Offset int64  `json:"offset,omitempty"`
	Rule   string `json:"rule,omitempty"`
	// Stage and Doc name the stage and document of an internal error.
	Stage   string `json:"stage,omitempty"`
	Doc     string `json:"doc,omitempty"`
	Message string `json:"message"`
	// Stack holds the first frames of an internal error's stack.
	Stack []string `json:"stack,omitempty"`
	// Fatal is true when the rest of the file could not be read.
	Fatal bool `json:"fatal"`
}

// InputSummary is one input file in the manifest.
type InputSummary struct {
	Path        string      `json:"path"`
	Source      string      `json:"source"`
	Bytes       int64       `json:"bytes"`
	XXH3        string      `json:"xxh3"`
	Codec       read.Codec  `json:"codec"`
	Format      read.Format `json:"format"`
	Docs        int64       `json:"docs"`
	Issues      int64       `json:"issues"`
	InvalidUTF8 int64       `json:"invalid_utf8"`
	Skipped     int64       `json:"skipped_records,omitempty"`
	// Skips counts, per rule, the records passed over because they hold
	// no page text (WARC redirects, error statuses, images, the crawler's
	// own records...); each also has a "skip" record in the read ledger.
	Skips    map[string]int64 `json:"skips,omitempty"`
	Complete bool             `json:"complete"`
	// Warnings are what the reader tolerated in this file (zero padding
	// after the last compressed stream).
	Warnings []string `json:"warnings,omitempty"`
}

// AddNanos adds running time, from any goroutine.
func (c *Counters) AddNanos(n int64) { c.nanos.Add(n) }

// Nanos is the running time so far.
func (c *Counters) Nanos() int64 { return c.nanos.Load() }

// SetFrom copies the flow counts and time of a checkpointed counter.
func (c *Counters) SetFrom(o *Counters) {
	c.DocsIn, c.DocsOut, c.BytesIn, c.BytesOut = o.DocsIn, o.DocsOut, o.BytesIn, o.BytesOut
	c.TokensOut, c.Dropped, c.Edited, c.Skipped, c.Seconds = o.TokensOut, o.Dropped, o.Edited, o.Skipped, o.Seconds
	c.RecordsOut = o.RecordsOut
	c.nanos.Store(int64(o.Seconds * 1e9))
}

// CheckpointFile is the checkpoint of an interrupted run, in the run's
// work directory (.work/).
const CheckpointFile = "checkpoint.json"

// ErrNoCheckpoint is returned by --resume when there is nothing to resume.
var ErrNoCheckpoint = errors.New("nothing to resume: the run directory holds no checkpoint (a run checkpoints after each global stage's scan; run again without --resume)")

// EmptyReason says, when no document reached the output although some
// were read, which stages removed them: the stage that let none through,
// and each earlier stage's share. It is "" when documents were written
// or none were read.
func (m *Manifest) EmptyReason() string {
	if m.Totals.DocsOut > 0 || m.Totals.DocsIn == 0 || m.Interrupted {
		return ""
	}
	var parts []string
	last := ""
	for _, c := range m.Stages {
		if c.Kind == "write" {
			continue
		}
		removed := c.Dropped
		if c.Kind == "read" {
			removed = c.DocsIn - c.DocsOut
		}
		if removed > 0 {
			parts = append(parts, fmt.Sprintf("%s removed %d", c.Name, removed))
		}
		if c.DocsIn > 0 && c.DocsOut == 0 {
			last = c.Name
			break
		}
	}
	msg := fmt.Sprintf("no document reached the output: all %d documents read were removed", m.Totals.DocsIn)
	if last != "" {
		msg += fmt.Sprintf("; stage %s let none through", last)
	}
	if len(parts) > 0 {
		msg += " (" + strings.Join(parts, ", ") + ")"
	}
	return msg + "; `winnow audit` shows the rules"
}

// WriteManifest writes manifest.json atomically.
func WriteManifest(dir string, m *Manifest) error {
	b, err := json.MarshalIndent(m, "", "  ")
	if err != nil {
		return err
	}
	return fsio.WriteFileAtomic(filepath.Join(dir, "manifest.json"), append(b, '\n'))
}

// ReadManifest loads a run's manifest.json.
func ReadManifest(dir string) (*Manifest, error) {
	b, err := os.ReadFile(filepath.Join(dir, "manifest.json"))
	if err != nil {
		return nil, err
	}
	var m Manifest
	if err := json.Unmarshal(b, &m); err != nil {
		return nil, fmt.Errorf("%s: %w", filepath.Join(dir, "manifest.json"), err)
	}
	return &m, nil
}

// CheckOutNotInput refuses an output directory that contains one of the
// inputs (a run would replace or read its own output).
func CheckOutNotInput(dir string, inputs []read.InputFile) error {
	abs, err := filepath.Abs(dir)
	if err != nil {
		return err
	}
	for _, in := range inputs {
		if in.Path == "-" {
			continue
		}
		p, _ := filepath.Abs(in.Path)
		if rel, err := filepath.Rel(abs, p); err == nil && !strings.HasPrefix(rel, "..") {
			return fmt.Errorf("output directory %s contains input %s: choose another --out", dir, in.Display)
		}
	}
	return nil
}

// runMarker is written when a run starts, so an interrupted run's directory
// is still recognised as belonging to its spec.
const runMarker = ".winnow-run"

// PrepareRunDir checks that dir may receive a run of the spec whose config
// hash is configHash and makes it ready: a directory holding a different
// run (or anything that is not a winnow run) is refused unless force; a
// directory that contains one of the inputs is always refused. It returns the temp directory for spills.
// With resume it keeps the interrupted run's ledger, metrics and work
// files instead (and refuses a directory holding another run).
func PrepareRunDir(dir, configHash string, inputs []read.InputFile, force, resume bool) (string, error) {
	abs, err := filepath.Abs(dir)
	if err != nil {
		return "", err
	}
	if err := CheckOutNotInput(dir, inputs); err != nil {
		return "", err
	}
	all, err := os.ReadDir(abs)
	if err != nil && !errors.Is(err, os.ErrNotExist) {
		return "", err
	}
	var entries []os.DirEntry
	for _, e := range all {
		if e.Name() != LockFile {
			entries = append(entries, e)
		}
	}
	if len(entries) > 0 && !force {
		marker, merr := os.ReadFile(filepath.Join(abs, runMarker))
		switch {
		case merr != nil:
			return "", fmt.Errorf("output directory %s is not empty and holds no winnow run: use --force to write into it", dir)
		case strings.TrimSpace(string(marker)) != configHash:
			return "", fmt.Errorf("output directory %s holds a different run (config hash %s, this spec %s): use --force to replace it", dir, strings.TrimSpace(string(marker)), configHash)
		}
	}
	if resume {
		marker, err := os.ReadFile(filepath.Join(abs, runMarker))
		if err != nil || strings.TrimSpace(string(marker)) != configHash {
			return "", fmt.Errorf("--resume: %s holds no interrupted run of this spec (config hash %s)", dir, configHash)
		}
		if _, err := os.Stat(filepath.Join(abs, ".work", CheckpointFile)); err != nil {
			return "", ErrNoCheckpoint
		}
		// Shards and reports are written again by the last segment.
		for _, sub := range []string{"shards"} {
			if err := os.RemoveAll(filepath.Join(abs, sub)); err != nil {
				return "", err
			}
		}
		for _, f := range []string{"manifest.json", "contamination.json"} {
			os.Remove(filepath.Join(abs, f))
		}
		return filepath.Join(abs, ".work"), nil
	}
	if force || len(entries) > 0 {
		// Replace the previous run's files; leave anything else alone.
		for _, sub := range []string{"shards", "ledger", "metrics", "keys", ".work"} {
			if err := os.RemoveAll(filepath.Join(abs, sub)); err != nil {
				return "", err
			}
		}
		for _, f := range []string{"manifest.json", "contamination.json"} {
			os.Remove(filepath.Join(abs, f))
		}
	}
	tmp := filepath.Join(abs, ".work")
	if err := os.MkdirAll(tmp, 0o755); err != nil {
		return "", err
	}
	if err := fsio.WriteFileAtomic(filepath.Join(abs, runMarker), []byte(configHash+"\n")); err != nil {
		return "", err
	}
	return tmp, nil
}

// MarkRunDir records in dir that it holds a run of configHash (a split
// run's write phase does it; a single process does it when it starts).
func MarkRunDir(dir, configHash string) error {
	return fsio.WriteFileAtomic(filepath.Join(dir, runMarker), []byte(configHash+"\n"))
}

// WaitLock takes an exclusive lock on the file at path (created when
// missing), waiting while another process holds it. release unlocks.
func WaitLock(path string) (release func(), err error) {
	f, err := os.OpenFile(path, os.O_CREATE|os.O_RDWR, 0o644)
	if err != nil {
		return nil, err
	}
	if err := flockWait(f); err != nil {
		f.Close()
		return nil, err
	}
	return func() { f.Close() }, nil
}

// TryLock takes an exclusive lock on the file at path (created when
// missing) without waiting: ok is false when another process (or another
// open of the file) holds it. release unlocks. Where flock is not
// available every attempt succeeds.
func TryLock(path string) (release func(), ok bool, err error) {
	f, err := os.OpenFile(path, os.O_CREATE|os.O_RDWR, 0o644)
	if err != nil {
		return nil, false, err
	}
	if err := flockNB(f); err != nil {
		f.Close()
		if flockBusy(err) {
			return nil, false, nil
		}
		return nil, false, err
	}
	return func() { f.Close() }, true, nil
}

// LockFile marks a run directory in use by a running winnow process.
const LockFile = ".winnow-lock"

// LockRunDir takes the run directory for this process, creating it when
// needed. OUT/.winnow-lock holds "host pid start-time" and is locked with
// flock while the run lasts, so the lock of a process that died (crash,
// kill -9) is free again and the next run takes it over. A directory in use
// is refused naming the holder; a lock file written on another host is
// refused too (flock is not shared between hosts on every network file
// system). release removes the lock (and the directory, when LockRunDir
// created it and nothing else was written).
func LockRunDir(dir string, logf func(string, ...any)) (release func(), err error) {
	abs, err := filepath.Abs(dir)
	if err != nil {
		return nil, err
	}
	created := false
	if _, err := os.Stat(abs); errors.Is(err, os.ErrNotExist) {
		created = true
	}
	if err := os.MkdirAll(abs, 0o755); err != nil {
		return nil, err
	}
	host, _ := os.Hostname()
	me := fmt.Sprintf("%s %d %s\n", host, os.Getpid(), time.Now().UTC().Format(time.RFC3339))
	path := filepath.Join(abs, LockFile)
	for attempt := 0; attempt < 5; attempt++ {
		f, err := os.OpenFile(path, os.O_RDWR|os.O_CREATE, 0o644)
		if err != nil {
			return nil, err
		}
		old, _ := io.ReadAll(io.LimitReader(f, 4096))
		var h, since string
		var pid int
		n, _ := fmt.Sscanf(string(old), "%s %d %s", &h, &pid, &since)
		if err := flockNB(f); err != nil {
			f.Close()
			if n < 2 {
				return nil, fmt.Errorf("output directory %s is in use by another winnow run (lock %s): wait for it to finish, or choose another --out", dir, path)
			}
			return nil, fmt.Errorf("output directory %s is in use by another winnow run (host %s, pid %d, since %s): wait for it to finish, or choose another --out", dir, h, pid, since)
		}
		// The file may have been removed by its holder between open and
		// lock: then the lock is on a file nobody else sees; try again.
		fi, ferr := f.Stat()
		pi, perr := os.Stat(path)
		if ferr != nil || perr != nil || !os.SameFile(fi, pi) {
			f.Close()
			continue
		}
		if n >= 2 && h != host {
			f.Close()
			return nil, fmt.Errorf("output directory %s is locked by a winnow run on host %s (pid %d, since %s): if that run is over, remove %s", dir, h, pid, since, path)
		}
		if n >= 2 && logf != nil {
			logf("%s: taking over the lock of winnow pid %d (since %s), which is no longer running", dir, pid, since)
		}
		if err := f.Truncate(0); err == nil {
			_, err = f.WriteAt([]byte(me), 0)
		}
		if err == nil {
			err = f.Sync()
		}
		if err != nil {
			f.Close()
			return nil, err
		}
		return func() {
			if pi, err := os.Stat(path); err == nil && os.SameFile(fi, pi) {
				os.Remove(path)
			}
			f.Close()
			if created {
				os.Remove(abs) // only when empty
			}
		}, nil
	}
	return nil, fmt.Errorf("output directory %s: could not take the lock %s", dir, path)
}
