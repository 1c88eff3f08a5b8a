package dsp

import "math"

// Goertzel measures the power of one frequency in consecutive,
// non-overlapping blocks of N real samples (Goertzel's second-order
// recursion, evaluated at the exact frequency, not the nearest DFT bin).
//
// Normalisation: a real sinusoid A·cos(2π·freqHz·t + φ) filling the block
// reads A²/2 (its mean-square power); white noise of variance σ² reads
// about 2σ²/N.
type Goertzel struct {
	n      int
	coeff  float64
	cw, sw float64
	s1, s2 float64
	cnt    int
}

// NewGoertzel returns a detector for freqHz at sample rate rate (Hz) over
// blocks of n samples (n < 1 is treated as 1).
func NewGoertzel(freqHz, rate float64, n int) *Goertzel {
	w := 2 * math.Pi * freqHz / rate
	return &Goertzel{n: max(n, 1), coeff: 2 * math.Cos(w), cw: math.Cos(w), sw: math.Sin(w)}
}

// N returns the block length in samples.
func (g *Goertzel) N() int { return g.n }

// Reset drops the partial block.
func (g *Goertzel) Reset() { g.s1, g.s2, g.cnt = 0, 0, 0 }

// Process returns append(dst[:0], ...) with one power reading per block
// completed by src; a partial block carries over to the next call.
func (g *Goertzel) Process(dst []float32, src []float32) []float32 {
	dst = dst[:0]
	s1, s2, c := g.s1, g.s2, g.coeff
	for _, x := range src {
		s0 := float64(x) + c*s1 - s2
		s2, s1 = s1, s0
		g.cnt++
		if g.cnt == g.n {
			re := s1 - s2*g.cw
			im := s2 * g.sw
			nn := float64(g.n)
			dst = append(dst, float32(2*(re*re+im*im)/(nn*nn)))
			s1, s2, g.cnt = 0, 0, 0
		}
	}
	g.s1, g.s2 = s1, s2
	return dst
}

// ToneMeter is a sliding tone-power meter for keying envelopes: for every
// input sample it returns the power of the component at freqHz over the
// last N samples, 2·|(1/N)·Σ x[m]·e^{−jωm}|² (a sliding single-bin DFT with
// a rectangular window). A real sinusoid of amplitude A reads A²/2 once the
// window is inside it; the reading ramps over N samples at key edges. The
// running sum is recomputed from its ring buffer every 65536 samples so
// rounding cannot accumulate.
type ToneMeter struct {
	n       int
	ring    []complex128
	pos     int
	sum     complex128
	rot     complex128
	step    complex128
	since   int
	normPow float64
}

// NewToneMeter returns a sliding meter for freqHz at sample rate rate over
// a window of n samples (n < 1 is treated as 1). Choose n ≈ rate/bandwidth:
// e.g. 5 ms (about a quarter of a 20 WPM dot) gives a 200 Hz wide detector.
func NewToneMeter(freqHz, rate float64, n int) *ToneMeter {
	n = max(n, 1)
	w := -2 * math.Pi * freqHz / rate
	return &ToneMeter{
		n: n, ring: make([]complex128, n),
		rot: 1, step: complex(math.Cos(w), math.Sin(w)),
		normPow: 2 / float64(n*n),
	}
}

// Reset clears the window.
func (t *ToneMeter) Reset() {
	clear(t.ring)
	t.pos, t.sum, t.rot, t.since = 0, 0, 1, 0
}

// Process returns append(dst[:0], ...) with one reading per input sample.
func (t *ToneMeter) Process(dst []float32, src []float32) []float32 {
	dst = growFloat32(dst, len(src))
	for i, x := range src {
		v := complex(float64(x), 0) * t.rot
		t.sum += v - t.ring[t.pos]
		t.ring[t.pos] = v
		t.pos++
		if t.pos == t.n {
			t.pos = 0
		}
		t.rot *= t.step
		t.since++
		if t.since >= 1<<16 {
			t.renorm()
		}
		re, im := real(t.sum), imag(t.sum)
		dst[i] = float32((re*re + im*im) * t.normPow)
	}
	return dst
}

// renorm recomputes the running sum and the oscillator exactly.
func (t *ToneMeter) renorm() {
	var s complex128
	for _, v := range t.ring {
		s += v
	}
	t.sum = s
	// The oscillator's phase is only a reference: re-anchor its magnitude.
	t.rot /= complex(math.Hypot(real(t.rot), imag(t.rot)), 0)
	t.since = 0
}
