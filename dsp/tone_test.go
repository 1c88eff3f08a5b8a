package dsp

import (
	"math"
	"math/cmplx"
	"testing"
)

// dftPower is the textbook single-frequency DFT power 2·|(1/N)Σx·e^{−jωn}|²
// (the definition the Goertzel recursion computes; common practice).
func dftPower(x []float32, f, rate float64) float64 {
	var s complex128
	for i, v := range x {
		s += complex(float64(v), 0) * cmplx.Exp(complex(0, -2*math.Pi*f/rate*float64(i)))
	}
	s /= complex(float64(len(x)), 0)
	return 2 * (real(s)*real(s) + imag(s)*imag(s))
}

func realTone(n int, f, rate, amp, ph float64) []float32 {
	x := make([]float32, n)
	for i := range x {
		x[i] = float32(amp * math.Cos(2*math.Pi*f/rate*float64(i)+ph))
	}
	return x
}

func TestGoertzel(t *testing.T) {
	const rate = 8000.0
	cases := []struct {
		name         string
		detHz, sigHz float64
		amp          float64
		n            int
		wantPow      float64 // analytic A²/2 where meaningful, else NaN (DFT only)
	}{
		{"on frequency, whole cycles", 800, 800, 0.5, 400, 0.125},
		{"on frequency, off-bin", 733.3, 733.3, 1, 401, math.NaN()},
		{"200 Hz away, 400 samples", 800, 1000, 1, 400, 0},
		{"near", 800, 810, 1, 400, math.NaN()},
	}
	for _, c := range cases {
		x := realTone(4*c.n, c.sigHz, rate, c.amp, 0.7)
		g := NewGoertzel(c.detHz, rate, c.n)
		var got []float32
		for i := 0; i < len(x); i += 123 {
			got = append(got, g.Process(nil, x[i:min(i+123, len(x))])...)
		}
		if len(got) != 4 {
			t.Fatalf("%s: %d readings, want 4", c.name, len(got))
		}
		for k, p := range got {
			want := dftPower(x[k*c.n:(k+1)*c.n], c.detHz, rate)
			if math.Abs(float64(p)-want) > 1e-5*math.Max(want, 1e-3) {
				t.Errorf("%s block %d: Goertzel %g, DFT %g", c.name, k, p, want)
			}
			// A real tone of amplitude A over whole cycles reads A²/2; a tone
			// on another whole-cycle bin reads 0 (DFT orthogonality).
			if !math.IsNaN(c.wantPow) && math.Abs(float64(p)-c.wantPow) > 1e-4 {
				t.Errorf("%s block %d: %g, want %g", c.name, k, p, c.wantPow)
			}
		}
	}
}

func TestToneMeterKeying(t *testing.T) {
	const rate = 8000.0
	const n = 40 // 5 ms window
	// 100 ms key down, 100 ms key up, repeated; 0.6 amplitude 700 Hz tone
	x := realTone(80000, 700, rate, 0.6, 0) // past the 65536-sample re-normalisation
	for i := range x {
		if (i/800)%2 == 1 {
			x[i] = 0
		}
	}
	tm := NewToneMeter(700, rate, n)
	var got []float32
	for i := 0; i < len(x); i += 333 {
		got = append(got, tm.Process(nil, x[i:min(i+333, len(x))])...)
	}
	for i := n; i < len(x); i++ {
		phase := i % 800
		if phase < n || phase > 800-1 { // ramps at edges
			continue
		}
		on := (i/800)%2 == 0
		// direct DFT of the last n samples (definition)
		want := dftPower(x[i-n+1:i+1], 700, rate)
		if math.Abs(float64(got[i])-want) > 1e-4 {
			t.Fatalf("sample %d: ToneMeter %g, DFT %g", i, got[i], want)
		}
		if on && math.Abs(float64(got[i])-0.18) > 0.01 { // A²/2 = 0.18 (±ripple of a 2.5-cycle window)
			t.Fatalf("sample %d key down: %g, want ≈0.18", i, got[i])
		}
		if !on && got[i] > 1e-6 {
			t.Fatalf("sample %d key up: %g, want 0", i, got[i])
		}
	}
}
