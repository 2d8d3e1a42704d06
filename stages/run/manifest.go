package run

import (
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"winnow/stages/fsio"
	"winnow/stages/read"
	"winnow/stages/record"
	"winnow/stages/spec"
)

// Manifest is OUT/manifest.json: the run's provenance. Field names are a
// contract (see README "Run directory"). Nothing in it depends on the
// number of workers; only the "seconds" fields vary between runs.
type Manifest struct {
	ToolVersion string              `json:"tool_version"`
	Name        string              `json:"name"`
	Config      any                 `json:"config"`
	ConfigHash  string              `json:"config_hash"`
	Seed        uint64              `json:"seed"`
	Inputs      []InputSummary      `json:"inputs"`
	Stages      []*Counters         `json:"stages"`
	Outputs     []record.OutputFile `json:"outputs"`
	Mix         any                 `json:"mix,omitempty"`
	Totals      Totals              `json:"totals"`
	Errors      []RunError          `json:"errors"`
	ErrorCount  int64               `json:"error_count"`
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
	DocsOut    int64 `json:"docs_out"`
	BytesOut   int64 `json:"bytes_out"`
	TokensOut  int64 `json:"tokens_out"`
}

// BuildManifest assembles the manifest from a finished (or interrupted)
// runner.
func BuildManifest(version string, s *spec.Spec, r *Runner, seconds float64) *Manifest {
	m := &Manifest{ToolVersion: version, Name: s.Name, Config: s.Config, ConfigHash: s.ConfigHash, Seed: s.Seed,
		Inputs: r.InputSums, Errors: r.Errors, ErrorCount: r.ErrCount, Interrupted: r.Interrupted, Seconds: seconds}
	if m.Inputs == nil {
		m.Inputs = []InputSummary{}
	}
	if m.Errors == nil {
		m.Errors = []RunError{}
	}
	for _, in := range m.Inputs {
		for rule, n := range in.Skips {
			if m.ReadSkips == nil {
				m.ReadSkips = map[string]int64{}
			}
			m.ReadSkips[rule] += n
		}
	}
	m.Stages = append(m.Stages, r.Read.snapshot())
	m.Stages = append(m.Stages, r.Counters...)
	w := r.Write.snapshot()
	if r.Output != nil {
		m.Outputs = r.Output.Files
		m.Mix = r.Output.Mix
		var docs, bytes, toks int64
		for _, f := range r.Output.Files {
			docs += f.Docs
			toks += f.Tokens
		}
		bytes = w.BytesIn
		w.DocsOut, w.BytesOut, w.TokensOut = docs, bytes, toks
	}
	m.Stages = append(m.Stages, w)
	if m.Outputs == nil {
		m.Outputs = []record.OutputFile{}
	}
	for _, in := range r.InputSums {
		m.Totals.InputFiles++
		m.Totals.InputBytes += in.Bytes
	}
	m.Totals.DocsIn = r.Read.DocsIn
	m.Totals.DocsOut = w.DocsOut
	m.Totals.BytesOut = w.BytesOut
	m.Totals.TokensOut = w.TokensOut
	return m
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

// runMarker is written when a run starts, so an interrupted run's directory
// is still recognised as belonging to its spec.
const runMarker = ".winnow-run"

// PrepareRunDir checks that dir may receive a run of spec s and makes it
// ready: a directory holding a different run (or anything that is not a
// winnow run) is refused unless force; a directory that contains one of
// the inputs is always refused. It returns the temp directory for spills.
// With resume it keeps the interrupted run's ledger, metrics and work
// files instead (and refuses a directory holding another run).
func PrepareRunDir(dir string, s *spec.Spec, inputs []read.InputFile, force, resume bool) (string, error) {
	abs, err := filepath.Abs(dir)
	if err != nil {
		return "", err
	}
	for _, in := range inputs {
		if in.Path == "-" {
			continue
		}
		p, _ := filepath.Abs(in.Path)
		if rel, err := filepath.Rel(abs, p); err == nil && !strings.HasPrefix(rel, "..") {
			return "", fmt.Errorf("output directory %s contains input %s: choose another --out", dir, in.Display)
		}
	}
	entries, err := os.ReadDir(abs)
	if err != nil && !errors.Is(err, os.ErrNotExist) {
		return "", err
	}
	if len(entries) > 0 && !force {
		marker, merr := os.ReadFile(filepath.Join(abs, runMarker))
		switch {
		case merr != nil:
			return "", fmt.Errorf("output directory %s is not empty and holds no winnow run: use --force to write into it", dir)
		case strings.TrimSpace(string(marker)) != s.ConfigHash:
			return "", fmt.Errorf("output directory %s holds a different run (config hash %s, this spec %s): use --force to replace it", dir, strings.TrimSpace(string(marker)), s.ConfigHash)
		}
	}
	if resume {
		marker, err := os.ReadFile(filepath.Join(abs, runMarker))
		if err != nil || strings.TrimSpace(string(marker)) != s.ConfigHash {
			return "", fmt.Errorf("--resume: %s holds no interrupted run of this spec (config hash %s)", dir, s.ConfigHash)
		}
		if _, err := os.Stat(filepath.Join(abs, ".work", checkpointFile)); err != nil {
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
	if err := fsio.WriteFileAtomic(filepath.Join(abs, runMarker), []byte(s.ConfigHash+"\n")); err != nil {
		return "", err
	}
	return tmp, nil
}
