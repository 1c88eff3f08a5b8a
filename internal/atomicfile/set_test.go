//go:build unix

package atomicfile

import (
	"errors"
	"io"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
)

// listDir returns the names in dir.
func listDir(t *testing.T, dir string) []string {
	t.Helper()
	ents, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var out []string
	for _, e := range ents {
		out = append(out, e.Name())
	}
	return out
}

func readString(t *testing.T, p string) string {
	t.Helper()
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

// A set of outputs appears whole on Commit; a failure in any one of them
// (or an Abort) leaves no new file, no temporary, and the old files as
// they were.
func TestSetAllOrNothing(t *testing.T) {
	dir := t.TempDir()
	a, b, c := filepath.Join(dir, "a.csv"), filepath.Join(dir, "b.png"), filepath.Join(dir, "c.json")
	if err := os.WriteFile(a, []byte("old a"), 0o644); err != nil {
		t.Fatal(err)
	}
	var s Set
	if err := s.Write(a, []byte("new a")); err != nil {
		t.Fatal(err)
	}
	if err := s.Write(b, []byte("new b")); err != nil {
		t.Fatal(err)
	}
	err := s.WriteFunc(c, func(w io.Writer) error {
		w.Write([]byte("half"))
		return errors.New("disk full")
	})
	if err == nil || !strings.Contains(err.Error(), "c.json") || !strings.Contains(err.Error(), "disk full") {
		t.Fatalf("failing output: %v", err)
	}
	// Nothing is visible before Commit; the caller gives up.
	if got := readString(t, a); got != "old a" {
		t.Errorf("a before commit: %q", got)
	}
	s.Abort()
	if got := listDir(t, dir); len(got) != 1 || got[0] != "a.csv" {
		t.Errorf("after abort the directory holds %v, want only a.csv", got)
	}
	if got := readString(t, a); got != "old a" {
		t.Errorf("a after abort: %q", got)
	}
	// A set that succeeds replaces and creates all of them at once.
	var s2 Set
	defer s2.Abort()
	for _, p := range []string{a, b, c} {
		if err := s2.Write(p, []byte("v2 "+filepath.Base(p))); err != nil {
			t.Fatal(err)
		}
	}
	if got := listDir(t, dir); len(got) != 4 {
		t.Errorf("staged: %v, want a.csv and three hidden temporaries", got)
	}
	if err := s2.Commit(); err != nil {
		t.Fatal(err)
	}
	if got := listDir(t, dir); len(got) != 3 {
		t.Errorf("after commit the directory holds %v", got)
	}
	for _, p := range []string{a, b, c} {
		if got := readString(t, p); got != "v2 "+filepath.Base(p) {
			t.Errorf("%s: %q", p, got)
		}
	}
	if err := s2.Commit(); err == nil {
		t.Error("second Commit accepted")
	}
}

// A rename that fails part-way rolls back the outputs already renamed:
// the old content of a replaced file is restored, a new file removed.
func TestSetCommitRollback(t *testing.T) {
	dir := t.TempDir()
	a, b := filepath.Join(dir, "a"), filepath.Join(dir, "b")
	os.WriteFile(a, []byte("old a"), 0o644)
	var s Set
	s.Write(a, []byte("new a"))
	s.Write(b, []byte("new b"))
	sub := filepath.Join(dir, "sub")
	os.Mkdir(sub, 0o755)
	if err := s.Write(filepath.Join(sub, "c"), []byte("new c")); err != nil {
		t.Fatal(err)
	}
	// Make the last rename fail: its target becomes a non-empty directory.
	os.Mkdir(filepath.Join(sub, "c"), 0o755)
	os.WriteFile(filepath.Join(sub, "c", "x"), nil, 0o644)
	err := s.Commit()
	if err == nil || !strings.Contains(err.Error(), "sub/c") {
		t.Fatalf("commit onto a directory: %v", err)
	}
	if got := readString(t, a); got != "old a" {
		t.Errorf("a after rollback: %q, want the old content", got)
	}
	if _, err := os.Stat(b); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("b after rollback: %v, want it removed", err)
	}
	if got := listDir(t, dir); len(got) != 2 { // a, sub
		t.Errorf("directory after rollback: %v", got)
	}
	if got := listDir(t, sub); len(got) != 1 {
		t.Errorf("sub after rollback: %v", got)
	}
}

// Through a symbolic link (absolute, relative, chained, dangling) the
// target file is replaced and the link kept, as editors do; a link loop is
// refused.
func TestSymlinkWrittenThrough(t *testing.T) {
	dir := t.TempDir()
	real := filepath.Join(dir, "data", "real.csv")
	os.Mkdir(filepath.Join(dir, "data"), 0o755)
	os.WriteFile(real, []byte("old"), 0o644)
	abs := filepath.Join(dir, "abs.csv")
	os.Symlink(real, abs)
	rel := filepath.Join(dir, "rel.csv")
	os.Symlink("data/real.csv", rel)
	chain := filepath.Join(dir, "chain.csv")
	os.Symlink("rel.csv", chain)
	for _, link := range []string{abs, rel, chain} {
		if err := Write(link, []byte("via "+filepath.Base(link))); err != nil {
			t.Fatalf("%s: %v", link, err)
		}
		fi, err := os.Lstat(link)
		if err != nil || fi.Mode()&os.ModeSymlink == 0 {
			t.Errorf("%s is no longer a symbolic link", link)
		}
		if got := readString(t, real); got != "via "+filepath.Base(link) {
			t.Errorf("through %s the target holds %q", link, got)
		}
	}
	dangling := filepath.Join(dir, "new.csv")
	os.Symlink("data/created.csv", dangling)
	if err := Write(dangling, []byte("made")); err != nil {
		t.Fatal(err)
	}
	if got := readString(t, filepath.Join(dir, "data", "created.csv")); got != "made" {
		t.Errorf("dangling link target: %q", got)
	}
	loop := filepath.Join(dir, "loop")
	os.Symlink("loop", loop)
	if err := Write(loop, nil); err == nil || !strings.Contains(err.Error(), "symbolic links") {
		t.Errorf("link loop: %v", err)
	}
	// Two outputs of one set that are the same file (through a link).
	var s Set
	defer s.Abort()
	if err := s.Write(real, nil); err != nil {
		t.Fatal(err)
	}
	if err := s.Write(abs, nil); err == nil || !strings.Contains(err.Error(), "same file") {
		t.Errorf("two outputs on one file: %v", err)
	}
}

// A named pipe, a device or a directory is refused with one line saying
// what it is, and nothing is written to or next to it.
func TestSpecialFilesRefused(t *testing.T) {
	dir := t.TempDir()
	fifo := filepath.Join(dir, "pipe")
	if err := syscall.Mkfifo(fifo, 0o644); err != nil {
		t.Fatal(err)
	}
	link := filepath.Join(dir, "tofifo")
	os.Symlink("pipe", link)
	cases := map[string]string{
		fifo:        "a named pipe (FIFO)",
		link:        "a named pipe (FIFO) (through a symbolic link to",
		"/dev/null": "a device",
		dir:         "a directory",
	}
	for p, want := range cases {
		err := Write(p, []byte("x"))
		if err == nil || !strings.Contains(err.Error(), want) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: %v, want one line with %q", p, err, want)
		}
	}
	if got := listDir(t, dir); len(got) != 2 {
		t.Errorf("directory after refusals: %v", got)
	}
}

// New files get 0666 less the umask, whatever the umask, temporaries too.
func TestModeFollowsUmask(t *testing.T) {
	old := syscall.Umask(0o027)
	defer syscall.Umask(old)
	dir := t.TempDir()
	p := filepath.Join(dir, "m")
	var s Set
	f, err := s.Create(p)
	if err != nil {
		t.Fatal(err)
	}
	fi, _ := os.Stat(f.f.Name())
	if fi.Mode().Perm() != 0o640 {
		t.Errorf("temporary mode %v under umask 027, want 0640", fi.Mode().Perm())
	}
	if err := s.Commit(); err != nil {
		t.Fatal(err)
	}
	fi, _ = os.Stat(p)
	if fi.Mode().Perm() != 0o640 {
		t.Errorf("mode %v under umask 027, want 0640", fi.Mode().Perm())
	}
	syscall.Umask(0o022)
	Write(p, nil)
	fi, _ = os.Stat(p)
	if fi.Mode().Perm() != 0o644 {
		t.Errorf("mode %v under umask 022, want 0644", fi.Mode().Perm())
	}
}

// ReadStaged gives back what was staged before the commit, refuses an
// open or unknown output, and the target stays untouched until Commit.
func TestSetReadStaged(t *testing.T) {
	dir := t.TempDir()
	a, b := filepath.Join(dir, "a.png"), filepath.Join(dir, "b.html")
	var s Set
	defer s.Abort()
	if err := s.Write(a, []byte("staged a")); err != nil {
		t.Fatal(err)
	}
	got, err := s.ReadStaged(a)
	if err != nil || string(got) != "staged a" {
		t.Fatalf("ReadStaged(a) = %q, %v", got, err)
	}
	if _, err := os.Stat(a); !errors.Is(err, os.ErrNotExist) {
		t.Fatalf("target exists before Commit: %v", err)
	}
	if _, err := s.ReadStaged(filepath.Join(dir, "other")); err == nil || !strings.Contains(err.Error(), "not staged") {
		t.Fatalf("unknown output: %v", err)
	}
	f, err := s.Create(b)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := s.ReadStaged(b); err == nil || !strings.Contains(err.Error(), "still open") {
		t.Fatalf("open output: %v", err)
	}
	f.Close()
	if err := s.Commit(); err != nil {
		t.Fatal(err)
	}
	if readString(t, a) != "staged a" {
		t.Fatal("committed content differs")
	}
}
