package dsp

import (
	"math"
	"slices"
)

// PowerMeter measures mean power, mean |x|² in full-scale units, over
// consecutive non-overlapping blocks of N samples. Partial blocks carry over
// between Process calls.
type PowerMeter struct {
	n   int
	acc float64
	cnt int
}

// NewPowerMeter returns a meter averaging n samples per reading (n < 1 is
// treated as 1).
func NewPowerMeter(n int) *PowerMeter {
	return &PowerMeter{n: max(n, 1)}
}

// N returns the samples per reading.
func (m *PowerMeter) N() int { return m.n }

// Reset drops the partial block.
func (m *PowerMeter) Reset() { m.acc, m.cnt = 0, 0 }

// Process returns append(dst[:0], readings...) with one linear power
// reading for each block of N samples completed by src. A complex sinusoid
// of amplitude 1 reads 1 (0 dBFS, see DBFS).
func (m *PowerMeter) Process(dst []float32, src []complex64) []float32 {
	dst = dst[:0]
	acc, cnt, n := m.acc, m.cnt, m.n
	inv := 1 / float64(n)
	for len(src) > 0 {
		take := min(n-cnt, len(src))
		var s float32
		for _, x := range src[:take] {
			s += real(x)*real(x) + imag(x)*imag(x)
		}
		acc += float64(s)
		cnt += take
		src = src[take:]
		if cnt == n {
			dst = append(dst, float32(acc*inv))
			acc, cnt = 0, 0
		}
	}
	m.acc, m.cnt = acc, cnt
	return dst
}

// DBFS converts a linear power p (mean |x|², full scale = a complex
// sinusoid of amplitude 1 = power 1) to dB relative to full scale:
// 10·log10(p). p ≤ 0 (and anything below −200 dBFS) gives −200.
func DBFS(p float64) float64 {
	if !(p > 1e-20) {
		return -200
	}
	return 10 * math.Log10(p)
}

// median returns the median of v (v is reordered).
func median(v []float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	slices.Sort(v)
	n := len(v)
	if n%2 == 1 {
		return v[n/2]
	}
	return (v[n/2-1] + v[n/2]) / 2
}
