package sdr

import (
	"encoding/binary"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"testing"
)

func testdataDir() string {
	_, file, _, _ := runtime.Caller(0)
	return filepath.Join(filepath.Dir(file), "..", "testdata", "sdr")
}

func run(t *testing.T, name string, args ...string) []byte {
	t.Helper()
	out, err := exec.Command(name, args...).CombinedOutput()
	if err != nil {
		t.Fatalf("%s %v: %v\n%s", name, args, err, out)
	}
	return out
}

func readCF32(t *testing.T, path string) []complex64 {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	out := make([]complex64, len(b)/8)
	for i := range out {
		out[i] = complex(math.Float32frombits(binary.LittleEndian.Uint32(b[8*i:])),
			math.Float32frombits(binary.LittleEndian.Uint32(b[8*i+4:])))
	}
	return out
}

// readAll drains a source in blocks of block samples.
func readAll(t *testing.T, s Source, block int) []complex64 {
	t.Helper()
	var out []complex64
	buf := make([]complex64, block)
	for {
		n, err := s.Read(buf)
		out = append(out, buf[:n]...)
		if err != nil {
			if err.Error() != "EOF" {
				t.Fatalf("read after %d samples: %v", len(out), err)
			}
			return out
		}
	}
}

func writeFile(t *testing.T, path string, b []byte) {
	t.Helper()
	if err := os.WriteFile(path, b, 0o644); err != nil {
		t.Fatal(err)
	}
}
