// Package atomicfile writes outputs so that a run leaves either all of them,
// whole, or none: each file is written to a temporary file in its target's
// directory and renamed into place only when every output of the run is
// ready (Set.Commit); a failure removes the temporaries (Set.Abort) and
// leaves every earlier file untouched.
//
// Targets:
//   - a symbolic link is written through, the way editors do: the file it
//     finally points to is replaced and the link is kept (a dangling link
//     creates its target);
//   - a named pipe, device, socket or directory is refused with one line
//     saying what it is (an output of this package is a regular file);
//   - two outputs of one Set resolving to the same file are refused.
//
// File modes: a new file gets 0666 less the process umask (0644 under the
// usual umask 022), like any file a program creates; the temporary is
// created with that mode, so it is never more open than the final file.
//
// Write and WriteFunc are the one-file form: a Set of one, committed at
// once.
package atomicfile

import (
	"crypto/rand"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
)

// maxLinkHops bounds the symbolic links followed from one path (Linux
// gives up at 40, SYMLOOP_MAX; path_resolution(7)).
const maxLinkHops = 40

// Write writes data to path atomically.
func Write(path string, data []byte) error {
	return WriteFunc(path, func(w io.Writer) error {
		_, err := w.Write(data)
		return err
	})
}

// WriteFunc writes what fill writes to path atomically.
func WriteFunc(path string, fill func(io.Writer) error) error {
	var s Set
	if err := s.WriteFunc(path, fill); err != nil {
		return err
	}
	return s.Commit()
}

// Set stages outputs and commits them together. The zero Set is ready to
// use; it is not safe for concurrent use.
type Set struct {
	files []*File
	done  bool
}

// File is one staged output: write to it, then Close it (or let the Set's
// Commit close it). Its content appears at its target only on Commit.
type File struct {
	f      *os.File
	path   string // as given, for messages
	target string // the regular file that will be replaced or created
	closed bool
	err    error
}

// Write implements io.Writer.
func (f *File) Write(p []byte) (int, error) {
	if f.closed {
		return 0, fmt.Errorf("write %s: already closed", f.path)
	}
	n, err := f.f.Write(p)
	if err != nil && f.err == nil {
		f.err = fmt.Errorf("write %s: %w", f.path, err)
	}
	return n, err
}

// Name returns the path the output was staged for.
func (f *File) Name() string { return f.path }

// Close syncs and closes the temporary file; it does not commit it.
func (f *File) Close() error {
	if f.closed {
		return f.err
	}
	f.closed = true
	err := f.f.Sync()
	if cerr := f.f.Close(); err == nil {
		err = cerr
	}
	if err != nil && f.err == nil {
		f.err = fmt.Errorf("write %s: %w", f.path, err)
	}
	return f.err
}

// resolve follows symbolic links from path to the file an output should
// replace, and refuses targets that are not regular files.
func resolve(path string) (string, error) {
	p := path
	for hop := 0; ; hop++ {
		fi, err := os.Lstat(p)
		if errors.Is(err, fs.ErrNotExist) {
			return p, nil
		}
		if err != nil {
			return "", fmt.Errorf("write %s: %w", path, err)
		}
		m := fi.Mode()
		switch {
		case m&fs.ModeSymlink != 0:
			if hop == maxLinkHops {
				return "", fmt.Errorf("write %s: more than %d symbolic links (a loop?)", path, maxLinkHops)
			}
			to, err := os.Readlink(p)
			if err != nil {
				return "", fmt.Errorf("write %s: %w", path, err)
			}
			if !filepath.IsAbs(to) {
				to = filepath.Join(filepath.Dir(p), to)
			}
			p = to
			continue
		case m.IsRegular():
			return p, nil
		}
		what := "not a regular file"
		switch {
		case m.IsDir():
			what = "a directory"
		case m&fs.ModeNamedPipe != 0:
			what = "a named pipe (FIFO)"
		case m&fs.ModeDevice != 0:
			what = "a device"
		case m&fs.ModeSocket != 0:
			what = "a socket"
		}
		via := ""
		if p != path {
			via = " (through a symbolic link to " + p + ")"
		}
		return "", fmt.Errorf("write %s: it is %s%s; outputs are written only to regular files: give a file name", path, what, via)
	}
}

// Check tells whether path could take an output, before any work is done:
// the error Create would give for a target that can never be a regular
// file (a directory, named pipe, device or socket, directly or through
// links, or a path through a regular file). A missing folder is not
// checked here; Create reports it.
func Check(path string) error {
	_, err := resolve(path)
	return err
}

// tempName is a fresh name beside target, hidden and marked .tmp.
func tempName(target string) string {
	var b [6]byte
	rand.Read(b[:])
	return filepath.Join(filepath.Dir(target), "."+filepath.Base(target)+"."+hex.EncodeToString(b[:])+".tmp")
}

// Create stages an output at path and returns the file to write it to.
func (s *Set) Create(path string) (*File, error) {
	if s.done {
		return nil, fmt.Errorf("write %s: the output set was already committed or aborted", path)
	}
	target, err := resolve(path)
	if err != nil {
		return nil, err
	}
	abs, _ := filepath.Abs(target)
	for _, o := range s.files {
		if oa, _ := filepath.Abs(o.target); oa == abs {
			return nil, fmt.Errorf("write %s: the same file as the output %s: give each output its own name", path, o.path)
		}
	}
	var f *os.File
	for try := 0; ; try++ {
		// O_EXCL with mode 0666: the kernel applies the umask.
		f, err = os.OpenFile(tempName(target), os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o666)
		if err == nil || !errors.Is(err, fs.ErrExist) || try == 10 {
			break
		}
	}
	if err != nil {
		return nil, fmt.Errorf("write %s: %w", path, err)
	}
	sf := &File{f: f, path: path, target: target}
	s.files = append(s.files, sf)
	return sf, nil
}

// WriteFunc stages an output at path with what fill writes, closed and
// ready to commit. A failing fill removes this output's temporary file
// (the others stay staged) and returns its error naming the path.
func (s *Set) WriteFunc(path string, fill func(io.Writer) error) error {
	f, err := s.Create(path)
	if err != nil {
		return err
	}
	err = fill(f)
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		s.Discard(f)
		if f.err != nil {
			return f.err
		}
		return fmt.Errorf("write %s: %w", path, err)
	}
	return nil
}

// Write stages an output at path holding data.
func (s *Set) Write(path string, data []byte) error {
	return s.WriteFunc(path, func(w io.Writer) error {
		_, err := w.Write(data)
		return err
	})
}

// Discard removes one staged output (its temporary file) from the set.
func (s *Set) Discard(f *File) {
	for i, o := range s.files {
		if o == f {
			s.files = append(s.files[:i], s.files[i+1:]...)
			break
		}
	}
	if !f.closed {
		f.closed = true
		f.f.Close()
	}
	os.Remove(f.f.Name())
}

// ReadStaged returns the content staged at path (as given to Create or
// Write), so that a later output can embed an earlier one before the set
// is committed. The output must be closed (WriteFunc and Write close it).
func (s *Set) ReadStaged(path string) ([]byte, error) {
	for _, f := range s.files {
		if f.path != path {
			continue
		}
		if !f.closed {
			return nil, fmt.Errorf("read staged %s: still open", path)
		}
		if f.err != nil {
			return nil, f.err
		}
		return os.ReadFile(f.f.Name())
	}
	return nil, fmt.Errorf("read staged %s: not staged in this set", path)
}

// Paths lists the staged outputs as given, in staging order.
func (s *Set) Paths() []string {
	out := make([]string, len(s.files))
	for i, f := range s.files {
		out[i] = f.path
	}
	return out
}

// Abort removes every staged temporary file; no target is touched. It is
// safe to call after Commit (then it does nothing) and more than once, so
// a caller may defer it.
func (s *Set) Abort() {
	if s.done {
		return
	}
	s.done = true
	for _, f := range s.files {
		if !f.closed {
			f.closed = true
			f.f.Close()
		}
		os.Remove(f.f.Name())
	}
	s.files = nil
}

// Commit closes every staged file and renames each into place, in the
// order they were staged (stage a file that describes others, such as a
// SigMF .sigmf-meta, last). If any file failed to write, nothing is
// renamed and every temporary is removed. If a rename fails part-way, the
// outputs already renamed are rolled back: a target that existed before
// gets its old content back (kept through a hard link while committing,
// where the file system has them), a new one is removed. The error names
// the output.
func (s *Set) Commit() error {
	if s.done {
		return errors.New("atomicfile: the output set was already committed or aborted")
	}
	for _, f := range s.files {
		if err := f.Close(); err != nil {
			s.Abort()
			return err
		}
	}
	s.done = true
	type undo struct{ target, backup string }
	var undos []undo
	var failed error
	for i, f := range s.files {
		u := undo{target: f.target}
		if _, err := os.Lstat(f.target); err == nil {
			b := tempName(f.target)
			if os.Link(f.target, b) == nil {
				u.backup = b
			}
		}
		if err := os.Rename(f.f.Name(), f.target); err != nil {
			failed = fmt.Errorf("write %s: %w", f.path, err)
			if u.backup != "" {
				os.Remove(u.backup)
			}
			for _, g := range s.files[i:] {
				os.Remove(g.f.Name())
			}
			break
		}
		undos = append(undos, u)
	}
	for j := len(undos) - 1; j >= 0; j-- {
		u := undos[j]
		switch {
		case failed != nil && u.backup != "":
			os.Rename(u.backup, u.target)
		case failed != nil:
			os.Remove(u.target)
		case u.backup != "":
			os.Remove(u.backup)
		}
	}
	s.files = nil
	return failed
}
