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

// NoiseFloor tracks the noise floor of a stream of power readings in dB
// (one Update per reading) while bursts of signal come and go.
//
// Method (minimum statistics on block means): the sliding window of
// windowS seconds is cut into noiseFloorBlocks sub-blocks. Each completed
// sub-block keeps the mean of its readings in linear power and the standard
// deviation of those readings. The estimate is the smallest sub-block mean
// in the window plus a bias correction: the minimum of several noise-only
// block means sits below the true mean by about 1.03 standard errors of a
// block mean (the expected minimum of 4 normal variates), so the corrected
// value is min + 1.03·s/√m, with s the readings' standard deviation in that
// block and m the readings per block. For exponentially distributed readings
// (one sample each) s equals the mean and the correction is large; for
// PowerMeter readings averaged over many samples it is small; either way it
// is measured, not assumed. The estimate is unaffected by bursts as long as
// at least about two sub-blocks of the window (2/noiseFloorBlocks of it)
// are burst-free. Until the first sub-block completes, the running mean of
// the readings so far is returned.
type NoiseFloor struct {
	per     int // readings per sub-block
	means   []float64
	sds     []float64
	head    int
	filled  int
	sum, sq float64
	cnt     int
	last    float64
}

const noiseFloorBlocks = 10

// NewNoiseFloor returns a tracker for readingsPerS readings per second over
// a sliding window of windowS seconds (at least noiseFloorBlocks readings;
// shorter windows are lengthened).
func NewNoiseFloor(readingsPerS float64, windowS float64) *NoiseFloor {
	n := int(math.Round(readingsPerS * windowS))
	per := max(n/noiseFloorBlocks, 1)
	return &NoiseFloor{
		per:   per,
		means: make([]float64, noiseFloorBlocks),
		sds:   make([]float64, noiseFloorBlocks),
		last:  -200,
	}
}

// Update adds one reading (dB, e.g. DBFS of a PowerMeter reading) and
// returns the current noise-floor estimate in dB (−200 if nothing but zero
// power has been seen).
func (f *NoiseFloor) Update(levelDB float64) float64 {
	p := 0.0
	if levelDB > -200 {
		p = math.Pow(10, levelDB/10)
	}
	f.sum += p
	f.sq += p * p
	f.cnt++
	if f.cnt == f.per {
		m := f.sum / float64(f.cnt)
		v := 0.0
		if f.cnt > 1 {
			v = math.Max(0, (f.sq-f.sum*m)/float64(f.cnt-1))
		}
		f.means[f.head] = m
		f.sds[f.head] = math.Sqrt(v)
		f.head = (f.head + 1) % len(f.means)
		f.filled = min(f.filled+1, len(f.means))
		f.sum, f.sq, f.cnt = 0, 0, 0
		best := -1
		for i := 0; i < f.filled; i++ {
			if best < 0 || f.means[i] < f.means[best] {
				best = i
			}
		}
		est := f.means[best] + 1.03*f.sds[best]/math.Sqrt(float64(f.per))
		if f.filled == 1 {
			est = f.means[best]
		}
		f.last = DBFS(est)
		return f.last
	}
	if f.filled == 0 {
		return DBFS(f.sum / float64(f.cnt))
	}
	return f.last
}

// Reset forgets all readings.
func (f *NoiseFloor) Reset() {
	clear(f.means)
	clear(f.sds)
	f.head, f.filled, f.sum, f.sq, f.cnt, f.last = 0, 0, 0, 0, 0, -200
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
