//go:build unix

package sdr

import (
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"

	"nullseek/internal/atomicfile"
)

// The pair's files share one mode, 0666 less the umask (a probe found the
// data 0600 beside a 0644 meta).
func TestWriterModes(t *testing.T) {
	old := syscall.Umask(0o022)
	defer syscall.Umask(old)
	dir := t.TempDir()
	base := filepath.Join(dir, "m")
	w, err := CreateSigMF(base, Info{SampleRate: 1e6}, "cu8")
	if err != nil {
		t.Fatal(err)
	}
	w.Write(make([]complex64, 10))
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	for _, ext := range []string{".sigmf-data", ".sigmf-meta"} {
		fi, err := os.Stat(base + ext)
		if err != nil {
			t.Fatal(err)
		}
		if fi.Mode().Perm() != 0o644 {
			t.Errorf("%s mode %v, want 0644 under umask 022", ext, fi.Mode().Perm())
		}
	}
}

// Replacing a pair: the old pair stays whole until Close; the data is
// staged before the meta (so the set renames it first); a failure staging
// the meta leaves the old pair untouched and no temporaries.
func TestWriterReplaceOrder(t *testing.T) {
	dir := t.TempDir()
	base := filepath.Join(dir, "p")
	writeOne := func(n int) *SigMFWriter {
		w, err := CreateSigMF(base, Info{SampleRate: 1e6}, "cu8")
		if err != nil {
			t.Fatal(err)
		}
		w.Write(make([]complex64, n))
		return w
	}
	if err := writeOne(3).Close(); err != nil {
		t.Fatal(err)
	}
	oldMeta, _ := os.ReadFile(base + ".sigmf-meta")
	w := writeOne(5)
	if b, err := os.ReadFile(base + ".sigmf-meta"); err != nil || string(b) != string(oldMeta) {
		t.Errorf("old meta touched before Close: %v", err)
	}
	if fi, err := os.Stat(base + ".sigmf-data"); err != nil || fi.Size() != 6 {
		t.Errorf("old data touched before Close: %v", err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	src, err := Open(base+".sigmf-meta", RawParams{})
	if err != nil {
		t.Fatal(err)
	}
	if got := readAll(t, src, 64); len(got) != 5 {
		t.Errorf("new pair holds %d samples, want 5", len(got))
	}
	src.Close()

	// Staging order inside a caller's set: data, then meta.
	var set atomicfile.Set
	w2, err := CreateSigMFIn(&set, filepath.Join(dir, "q"), Info{SampleRate: 1e6}, "cu8")
	if err != nil {
		t.Fatal(err)
	}
	w2.Write(make([]complex64, 2))
	if err := w2.Close(); err != nil {
		t.Fatal(err)
	}
	if p := set.Paths(); len(p) != 2 || !strings.HasSuffix(p[0], "q.sigmf-data") || !strings.HasSuffix(p[1], "q.sigmf-meta") {
		t.Errorf("staging order %v, want data then meta", p)
	}
	if _, err := os.Stat(filepath.Join(dir, "q.sigmf-meta")); err == nil {
		t.Error("the caller's set committed by the writer")
	}
	if err := set.Commit(); err != nil {
		t.Fatal(err)
	}

	// The meta cannot be written (its name is taken by a directory): the
	// new recording fails and the old pair is as it was.
	r := filepath.Join(dir, "r")
	if err := os.Mkdir(r+".sigmf-meta", 0o755); err != nil {
		t.Fatal(err)
	}
	w3, err := CreateSigMF(r, Info{SampleRate: 1e6}, "cu8")
	if err != nil {
		t.Fatal(err)
	}
	w3.Write(make([]complex64, 2))
	if err := w3.Close(); err == nil || !strings.Contains(err.Error(), "a directory") {
		t.Errorf("meta onto a directory: %v", err)
	}
	ents, _ := os.ReadDir(dir)
	var names []string
	for _, e := range ents {
		names = append(names, e.Name())
	}
	if len(names) != 5 { // p pair, q pair, r.sigmf-meta directory
		t.Errorf("after the failed recording the directory holds %v", names)
	}
}

// A pair behind symbolic links is written through them; a FIFO as the
// data file is refused at creation.
func TestWriterSymlinkAndFIFO(t *testing.T) {
	dir := t.TempDir()
	store := filepath.Join(dir, "store")
	os.Mkdir(store, 0o755)
	base := filepath.Join(dir, "l")
	os.Symlink("store/x.sigmf-data", base+".sigmf-data")
	os.Symlink("store/x.sigmf-meta", base+".sigmf-meta")
	w, err := CreateSigMF(base, Info{SampleRate: 1e6}, "cu8")
	if err != nil {
		t.Fatal(err)
	}
	w.Write(make([]complex64, 4))
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	for _, ext := range []string{".sigmf-data", ".sigmf-meta"} {
		if fi, err := os.Lstat(base + ext); err != nil || fi.Mode()&os.ModeSymlink == 0 {
			t.Errorf("%s is no longer a link", ext)
		}
		if _, err := os.Stat(filepath.Join(store, "x"+ext)); err != nil {
			t.Errorf("link target of %s not written: %v", ext, err)
		}
	}
	fifo := filepath.Join(dir, "f")
	if err := syscall.Mkfifo(fifo+".sigmf-data", 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := CreateSigMF(fifo, Info{SampleRate: 1e6}, "cu8"); err == nil || !strings.Contains(err.Error(), "named pipe") {
		t.Errorf("FIFO data file: %v", err)
	}
}
