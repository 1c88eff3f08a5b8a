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
// Method (minimum statistics, after R. Martin's noise-power tracking by
// minimum statistics, here on a moving average): readings are converted to
// linear power and averaged over a sliding sub-window of m = window/20
// readings; the estimate is the smallest of those moving averages over the
// last window readings, plus a bias correction. The minimum of many
// overlapping noisy averages sits below the mean; the correction adds
// noiseFloorBiasK (2.0) standard errors, σ/√m, with σ the standard deviation of the readings
// inside the minimising sub-window (so it adapts to the reading
// distribution: σ equals the mean for exponentially distributed readings
// of single samples and shrinks as 1/√n for readings averaged over n
// samples). The estimate is unaffected by bursts as long as every window
// holds one burst-free stretch of m readings (a twentieth of the window):
// bursts may occupy most of the window. Until m readings have arrived the
// running mean is returned.
type NoiseFloor struct {
	m, w       int
	ring       []float64 // last m readings, linear
	pos        int
	seen       int
	sum, sumSq float64
	// monotone deque of (index, mean, sd) for the sliding minimum
	dqIdx      []int
	dqMean     []float64
	dqSD       []float64
	dqHead, dq int
	sinceFix   int
}

// noiseFloorBiasK is the bias correction in standard errors of the
// sub-window mean; found by simulation of exponential and averaged readings
// with 0.5–3 s gaps between bursts (see TestNoiseFloorWithBursts).
const noiseFloorBiasK = 2.0

// NewNoiseFloor returns a tracker for readingsPerS readings per second over
// a sliding window of windowS seconds (at least 20 readings; shorter
// windows are lengthened).
func NewNoiseFloor(readingsPerS float64, windowS float64) *NoiseFloor {
	w := max(int(math.Round(readingsPerS*windowS)), 20)
	m := max(w/20, 1)
	return &NoiseFloor{
		m: m, w: w,
		ring:   make([]float64, m),
		dqIdx:  make([]int, w+1),
		dqMean: make([]float64, w+1),
		dqSD:   make([]float64, w+1),
	}
}

// Update adds one reading (dB, e.g. DBFS of a PowerMeter reading; −200 or
// less counts as zero power) and returns the current noise-floor estimate
// in dB.
func (f *NoiseFloor) Update(levelDB float64) float64 {
	p := 0.0
	if levelDB > -200 {
		p = math.Pow(10, levelDB/10)
	}
	old := f.ring[f.pos]
	f.ring[f.pos] = p
	f.pos = (f.pos + 1) % f.m
	f.sum += p - old
	f.sumSq += p*p - old*old
	f.seen++
	f.sinceFix++
	if f.sinceFix >= 4*f.w { // wash out rounding of the running sums
		f.sum, f.sumSq = 0, 0
		for _, v := range f.ring {
			f.sum += v
			f.sumSq += v * v
		}
		f.sinceFix = 0
	}
	if f.seen < f.m {
		return DBFS(f.sum / float64(f.seen))
	}
	mean := math.Max(f.sum/float64(f.m), 0)
	sd := 0.0
	if f.m > 1 {
		sd = math.Sqrt(math.Max(0, (f.sumSq-f.sum*mean)/float64(f.m-1)))
	}
	// sliding minimum over the last w means
	n := len(f.dqIdx)
	for f.dq > 0 {
		last := (f.dqHead + f.dq - 1) % n
		if f.dqMean[last] < mean {
			break
		}
		f.dq--
	}
	tail := (f.dqHead + f.dq) % n
	f.dqIdx[tail], f.dqMean[tail], f.dqSD[tail] = f.seen, mean, sd
	f.dq++
	for f.dqIdx[f.dqHead] <= f.seen-f.w {
		f.dqHead = (f.dqHead + 1) % n
		f.dq--
	}
	h := f.dqHead
	return DBFS(f.dqMean[h] + noiseFloorBiasK*f.dqSD[h]/math.Sqrt(float64(f.m)))
}

// Reset forgets all readings.
func (f *NoiseFloor) Reset() {
	clear(f.ring)
	f.pos, f.seen, f.sum, f.sumSq, f.dqHead, f.dq, f.sinceFix = 0, 0, 0, 0, 0, 0, 0
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
