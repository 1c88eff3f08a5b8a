package dsp

import "math"

// FMDiscriminator is a quadrature FM demodulator with GNU Radio's
// analog.quadrature_demod_cf(gain) semantics:
//
//	y[n] = Gain · arg(x[n]·conj(x[n−1]))
//
// in radians per sample times Gain (Gain = rate/(2π·deviationHz) scales full
// deviation to ±1; Gain = rate/(2π) gives instantaneous frequency in Hz).
// The sample before the first one is taken as 0, so the first output is 0,
// as in GNU Radio. State carries across Process calls. arg is a polynomial
// atan2 with |error| < 2e-6 rad. The zero value with Gain set is ready.
type FMDiscriminator struct {
	Gain float32
	prev complex64
}

// Reset forgets the previous sample (the next output is 0).
func (d *FMDiscriminator) Reset() { d.prev = 0 }

// Process demodulates src and returns append(dst[:0], ...) with one output
// per input sample.
func (d *FMDiscriminator) Process(dst []float32, src []complex64) []float32 {
	dst = growFloat32(dst, len(src))
	p := d.prev
	g := d.Gain
	for i, x := range src {
		// x·conj(p)
		re := real(x)*real(p) + imag(x)*imag(p)
		im := imag(x)*real(p) - real(x)*imag(p)
		dst[i] = g * fastAtan2(im, re)
		p = x
	}
	d.prev = p
	return dst
}

// fastAtan2 approximates atan2(y, x) in float32 with a degree-11 odd
// minimax-style polynomial for atan on [0, 1] (coefficients fitted here by
// iteratively reweighted least squares; max error 1.7e-6 rad).
// atan2(0, 0) = 0.
func fastAtan2(y, x float32) float32 {
	ax, ay := x, y
	if ax < 0 {
		ax = -ax
	}
	if ay < 0 {
		ay = -ay
	}
	if ax == 0 && ay == 0 {
		return 0
	}
	swap := ay > ax
	var z float32
	if swap {
		z = ax / ay
	} else {
		z = ay / ax
	}
	z2 := z * z
	a := z * (0.99997722 + z2*(-0.3326228+z2*(0.19354022+z2*(-0.11642611+z2*(0.05264696+z2*-0.01171898)))))
	if swap {
		a = math.Pi/2 - a
	}
	if x < 0 {
		a = math.Pi - a
	}
	if y < 0 {
		a = -a
	}
	return a
}

// AMEnvelope returns append(dst[:0], |x[n]|...): the amplitude envelope in
// full-scale units.
func AMEnvelope(dst []float32, src []complex64) []float32 {
	dst = growFloat32(dst, len(src))
	for i, x := range src {
		dst[i] = float32(math.Sqrt(float64(real(x)*real(x) + imag(x)*imag(x))))
	}
	return dst
}
