package cpuprofile

import (
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// TestAround: a successful run keeps a profile that `go tool pprof` (the
// Go toolchain's reader of runtime/pprof files) reads; a failed run
// leaves no file and returns the work's error; a folder that does not
// exist is refused naming --cpuprofile.
func TestAround(t *testing.T) {
	dir := t.TempDir()
	ok := filepath.Join(dir, "ok.prof")
	if err := Around(ok, func() error {
		x := 0
		for i := 0; i < 1e7; i++ {
			x += i
		}
		_ = x
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	if out, err := exec.Command("go", "tool", "pprof", "-raw", ok).CombinedOutput(); err != nil {
		t.Errorf("go tool pprof -raw: %v\n%s", err, out)
	}
	bad := filepath.Join(dir, "bad.prof")
	want := errors.New("the work failed")
	if err := Around(bad, func() error { return want }); err != want {
		t.Errorf("error %v, want the work's", err)
	}
	if _, err := os.Stat(bad); !os.IsNotExist(err) {
		t.Errorf("a failed run left %s: %v", bad, err)
	}
	if err := Around(filepath.Join(dir, "no", "p.prof"), func() error { return nil }); err == nil || !strings.HasPrefix(err.Error(), "--cpuprofile: ") {
		t.Errorf("missing folder: %v", err)
	}
	es, _ := os.ReadDir(dir)
	if len(es) != 1 {
		t.Errorf("files left in the folder: %v", es)
	}
}
