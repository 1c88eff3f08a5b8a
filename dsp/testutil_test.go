package dsp

import (
	"encoding/binary"
	"math"
	"os"
	"path/filepath"
	"testing"
)

func readFixture(t *testing.T, name string) []byte {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("..", "testdata", "dsp", name))
	if err != nil {
		t.Fatalf("read fixture %s: %v", name, err)
	}
	return b
}

func decodeCF32(b []byte) []complex64 {
	out := make([]complex64, len(b)/8)
	for i := range out {
		re := math.Float32frombits(binary.LittleEndian.Uint32(b[8*i:]))
		im := math.Float32frombits(binary.LittleEndian.Uint32(b[8*i+4:]))
		out[i] = complex(re, im)
	}
	return out
}

func decodeF32(b []byte) []float32 {
	out := make([]float32, len(b)/4)
	for i := range out {
		out[i] = math.Float32frombits(binary.LittleEndian.Uint32(b[4*i:]))
	}
	return out
}

// tone returns n samples of amp·e^{j(2π·f/rate·i + ph)}.
func tone(n int, f, rate, amp, ph float64) []complex64 {
	x := make([]complex64, n)
	for i := range x {
		a := 2*math.Pi*f/rate*float64(i) + ph
		x[i] = complex(float32(amp*math.Cos(a)), float32(amp*math.Sin(a)))
	}
	return x
}
