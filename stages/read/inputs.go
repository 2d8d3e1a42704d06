package read

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"
)

// InputFile is one resolved input file of a run.
type InputFile struct {
	// Path is the file to open ("-" for standard input).
	Path string
	// Display is the path shown in ids, ledger and manifest: relative to
	// the spec directory when inside it, else absolute (default ids drop
	// its leading "/").
	Display string
	// Index is the file's position in the run (the high part of order keys).
	Index int
	// Size is the file size in bytes (-1 for stdin).
	Size int64
	// Options are the read options of the input group the file belongs to.
	Options *ReadOptions
}

// Group is one entry of a spec's "inputs": how to read, and which paths.
type Group struct {
	Options *ReadOptions
	Paths   []string
}

// ResolveInputs expands every input's paths (files, globs with "**",
// directories walked recursively, "-") into an ordered, de-duplicated file
// list. A missing file, a glob that matches nothing or a directory with no
// files is an error before any work starts.
// specFile names the spec in messages; relative paths resolve against dir.
func ResolveInputs(specFile, dir string, groups []Group) ([]InputFile, error) {
	var out []InputFile
	seen := map[string]bool{}
	var errs []error
	stdin := false
	for _, g := range groups {
		in := g.Options
		for _, pat := range g.Paths {
			if pat == "-" {
				if stdin {
					errs = append(errs, fmt.Errorf("%s: input %q: standard input named twice", specFile, in.Source))
					continue
				}
				stdin = true
				out = append(out, InputFile{Path: "-", Display: "-", Size: -1, Options: in})
				continue
			}
			full := pat
			if !filepath.IsAbs(full) {
				full = filepath.Join(dir, pat)
			}
			files, err := ExpandPath(full)
			if err != nil {
				where := ""
				if !filepath.IsAbs(pat) {
					where = fmt.Sprintf(" (relative to the spec's directory %s)", dir)
				}
				errs = append(errs, fmt.Errorf("input %q: path %q%s: %w", in.Source, pat, where, err))
				continue
			}
			for _, f := range files {
				if seen[f] {
					continue
				}
				seen[f] = true
				st, err := os.Stat(f)
				if err != nil {
					errs = append(errs, fmt.Errorf("input %q: %w", in.Source, err))
					continue
				}
				disp := f
				if rel, err := filepath.Rel(dir, f); err == nil && !strings.HasPrefix(rel, "..") {
					disp = filepath.ToSlash(rel)
				}
				out = append(out, InputFile{Path: f, Display: disp, Size: st.Size(), Options: in})
			}
		}
	}
	for i := range out {
		out[i].Index = i
	}
	if len(out) >= maxInputFiles {
		errs = append(errs, fmt.Errorf("%d input files: at most %d are supported in one run", len(out), maxInputFiles))
	}
	return out, errors.Join(errs...)
}

func hasMeta(p string) bool { return strings.ContainsAny(p, "*?[") }

// ExpandPath returns the regular files a path names, sorted.
func ExpandPath(p string) ([]string, error) {
	if !hasMeta(p) {
		st, err := os.Stat(p)
		if err != nil {
			if errors.Is(err, fs.ErrNotExist) {
				return nil, fmt.Errorf("no such file or directory")
			}
			return nil, err
		}
		if !st.IsDir() {
			return []string{p}, nil
		}
		files, err := walkFiles(p, nil)
		if err != nil {
			return nil, err
		}
		if len(files) == 0 {
			return nil, fmt.Errorf("directory holds no files")
		}
		return files, nil
	}
	var files []string
	if strings.Contains(p, "**") {
		root := p[:strings.Index(p, "**")]
		root = filepath.Dir(root + "x")
		rest := p[len(root):]
		rest = strings.TrimPrefix(rest, string(filepath.Separator))
		var err error
		files, err = walkFiles(root, func(rel string) bool { return matchDoubleStar(rest, rel) })
		if err != nil {
			return nil, err
		}
	} else {
		matches, err := filepath.Glob(p)
		if err != nil {
			return nil, err
		}
		for _, m := range matches {
			st, err := os.Stat(m)
			if err != nil {
				return nil, err
			}
			if st.IsDir() {
				sub, err := walkFiles(m, nil)
				if err != nil {
					return nil, err
				}
				files = append(files, sub...)
			} else {
				files = append(files, m)
			}
		}
	}
	sort.Strings(files)
	if len(files) == 0 {
		return nil, fmt.Errorf("glob matches no files")
	}
	return files, nil
}

// walkFiles lists regular, non-hidden files under root, sorted; keep (when
// set) filters by slash-separated path relative to root.
func walkFiles(root string, keep func(rel string) bool) ([]string, error) {
	var files []string
	err := filepath.WalkDir(root, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		name := d.Name()
		if path != root && strings.HasPrefix(name, ".") {
			if d.IsDir() {
				return filepath.SkipDir
			}
			return nil
		}
		if !d.Type().IsRegular() {
			return nil
		}
		if keep != nil {
			rel, _ := filepath.Rel(root, path)
			if !keep(filepath.ToSlash(rel)) {
				return nil
			}
		}
		files = append(files, path)
		return nil
	})
	sort.Strings(files)
	return files, err
}

// matchDoubleStar matches a slash-separated path against a pattern whose
// "**" segments match any number of directories.
func matchDoubleStar(pattern, path string) bool {
	pp := strings.Split(filepath.ToSlash(pattern), "/")
	sp := strings.Split(path, "/")
	var rec func(i, j int) bool
	rec = func(i, j int) bool {
		if i == len(pp) {
			return j == len(sp)
		}
		if pp[i] == "**" {
			for k := j; k <= len(sp); k++ {
				if rec(i+1, k) {
					return true
				}
			}
			return false
		}
		if j == len(sp) {
			return false
		}
		ok, _ := filepath.Match(pp[i], sp[j])
		return ok && rec(i+1, j+1)
	}
	return rec(0, 0)
}

// InputStamp is what an input file looked like when it was opened: its
// size and modification time. A file that is appended to, truncated or
// rewritten while it is read yields documents that belong to no single
// version of it, so such a read must not count as complete.
type InputStamp struct {
	Size    int64
	ModTime time.Time
	ok      bool
}

// StampFile records f's size and modification time (nothing for stdin or
// a pipe, whose size means nothing).
func StampFile(f *os.File) InputStamp {
	st, err := f.Stat()
	if err != nil || !st.Mode().IsRegular() {
		return InputStamp{}
	}
	return InputStamp{Size: st.Size(), ModTime: st.ModTime(), ok: true}
}

// ErrInputChanged marks an input that changed while it was read.
var ErrInputChanged = errors.New("input changed while it was read")

// Check compares the file at the end of reading with the stamp taken at
// open: the open file's size and time, the file now at path (which may
// have been replaced by a rename), and read, the bytes actually read (-1
// when unknown). The error names the file and what differs.
func (s InputStamp) Check(path string, f *os.File, read int64) error {
	if !s.ok {
		return nil
	}
	var diffs []string
	if st, err := f.Stat(); err == nil {
		if st.Size() != s.Size {
			diffs = append(diffs, fmt.Sprintf("size %d bytes at open, %d at the end", s.Size, st.Size()))
		}
		if !st.ModTime().Equal(s.ModTime) {
			diffs = append(diffs, fmt.Sprintf("modified at %s after being opened (%s)", st.ModTime().UTC().Format(time.RFC3339Nano), s.ModTime.UTC().Format(time.RFC3339Nano)))
		}
	}
	if read >= 0 && read != s.Size {
		diffs = append(diffs, fmt.Sprintf("%d bytes read of %d", read, s.Size))
	}
	if st, err := os.Stat(path); err != nil {
		diffs = append(diffs, fmt.Sprintf("gone at the end of reading (%v)", err))
	} else if pf, err := f.Stat(); err == nil && !os.SameFile(st, pf) {
		diffs = append(diffs, "replaced by another file while being read")
	}
	if len(diffs) == 0 {
		return nil
	}
	return fmt.Errorf("%s: %w: %s; its documents may be cut or mixed, read it again when it is stable", path, ErrInputChanged, strings.Join(diffs, "; "))
}
