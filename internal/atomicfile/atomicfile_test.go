package atomicfile

import (
	"errors"
	"io"
	"os"
	"path/filepath"
	"testing"
)

func TestWrite(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "a.txt")
	if err := Write(p, []byte("one")); err != nil {
		t.Fatal(err)
	}
	// A failing writer leaves the old content and no temporary file.
	err := WriteFunc(p, func(w io.Writer) error {
		w.Write([]byte("half"))
		return errors.New("disk gone")
	})
	if err == nil {
		t.Fatal("no error from a failing fill")
	}
	b, _ := os.ReadFile(p)
	ents, _ := os.ReadDir(dir)
	if string(b) != "one" || len(ents) != 1 {
		t.Errorf("after a failed write: content %q, %d files", b, len(ents))
	}
	if err := Write(filepath.Join(dir, "no", "such", "dir"), nil); err == nil {
		t.Error("no error for a missing directory")
	}
}
