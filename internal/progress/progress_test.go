package progress

import (
	"bytes"
	"os"
	"testing"
)

// A buffer and a regular file are not terminals (term.IsTerminal, the
// isatty test of POSIX.1-2017 isatty()): no bar is drawn on them.
func TestNoBarOffTerminal(t *testing.T) {
	var buf bytes.Buffer
	set, done := Bar(&buf, 100, "scanning")
	set(50)
	done()
	if buf.Len() != 0 {
		t.Errorf("bar drawn on a buffer: %q", buf.String())
	}
	f, err := os.Create(t.TempDir() + "/out")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if Terminal(f) != nil {
		t.Error("a regular file taken for a terminal")
	}
	set, done = Bar(f, 100, "scanning")
	set(100)
	done()
	if st, _ := f.Stat(); st.Size() != 0 {
		t.Errorf("bar drawn on a regular file: %d bytes", st.Size())
	}
}
