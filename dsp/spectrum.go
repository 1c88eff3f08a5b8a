package dsp

import (
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/dsp/fourier"
)

// SpectrumAverager accumulates a Welch-style averaged power spectrum:
// Hann-windowed FFTs of nfft samples with 50 % overlap, averaged in linear
// power. Samples are fed with Add in blocks of any length.
//
// Normalisation (dBFS per bin): a complex sinusoid of amplitude 1 centred
// on a bin reads 0 dB in that bin; complex white noise of power σ² reads
// σ²·1.5/nfft per bin (1.5 bins is the Hann window's equivalent noise
// bandwidth).
type SpectrumAverager struct {
	nfft  int
	fft   *fourier.CmplxFFT
	win   []float64
	buf   []complex64
	fill  int
	work  []complex128
	coef  []complex128
	acc   []float64
	count int
	norm  float64
}

// NewSpectrumAverager returns an averager with nfft bins (nfft ≥ 2).
func NewSpectrumAverager(nfft int) (*SpectrumAverager, error) {
	if nfft < 2 {
		return nil, fmt.Errorf("spectrum averager: nfft %d, need at least 2", nfft)
	}
	s := &SpectrumAverager{
		nfft: nfft, fft: fourier.NewCmplxFFT(nfft),
		win: make([]float64, nfft), buf: make([]complex64, nfft),
		work: make([]complex128, nfft), coef: make([]complex128, nfft),
		acc: make([]float64, nfft),
	}
	sum := 0.0
	for i := range s.win {
		// periodic Hann window
		s.win[i] = 0.5 - 0.5*math.Cos(2*math.Pi*float64(i)/float64(nfft))
		sum += s.win[i]
	}
	s.norm = 1 / (sum * sum)
	return s, nil
}

// Add feeds samples; every nfft/2 new samples (after the first nfft)
// complete one more FFT frame.
func (s *SpectrumAverager) Add(x []complex64) {
	hop := s.nfft / 2
	for len(x) > 0 {
		m := min(len(x), s.nfft-s.fill)
		copy(s.buf[s.fill:], x[:m])
		s.fill += m
		x = x[m:]
		if s.fill == s.nfft {
			s.frame()
			copy(s.buf, s.buf[s.nfft-hop:])
			s.fill = hop
		}
	}
}

func (s *SpectrumAverager) frame() {
	for i, v := range s.buf {
		s.work[i] = complex(float64(real(v))*s.win[i], float64(imag(v))*s.win[i])
	}
	s.fft.Coefficients(s.coef, s.work)
	for i, c := range s.coef {
		s.acc[i] += real(c)*real(c) + imag(c)*imag(c)
	}
	s.count++
}

// Frames returns the number of FFT frames averaged so far.
func (s *SpectrumAverager) Frames() int { return s.count }

// Reset clears the average and the pending samples.
func (s *SpectrumAverager) Reset() {
	clear(s.acc)
	s.count, s.fill = 0, 0
}

// Result returns append(dst[:0], ...) with the averaged spectrum in dBFS
// per bin, in centred order: bin i is at (i − nfft/2)·rate/nfft Hz, so DC
// is bin nfft/2. With no complete frame every bin reads −200.
func (s *SpectrumAverager) Result(dst []float64) []float64 {
	dst = dst[:0]
	half := s.nfft / 2
	for i := 0; i < s.nfft; i++ {
		k := (i + s.nfft - half) % s.nfft
		p := 0.0
		if s.count > 0 {
			p = s.acc[k] * s.norm / float64(s.count)
		}
		dst = append(dst, DBFS(p))
	}
	return dst
}

// Carrier is a spectral peak found by FindCarriers.
type Carrier struct {
	OffsetHz float64 // peak frequency relative to the spectrum centre, interpolated between bins
	LevelDB  float64 // interpolated peak level, dBFS per bin (≈ the tone's power for a pure tone)
	SNRDB    float64 // LevelDB minus the noise floor per bin
}

// FindCarriers lists the peaks of a centred spectrum (dB per bin, as from
// SpectrumAverager.Result, covering sample rate rate Hz) that stand at
// least minSNRDB above the noise floor, strongest first.
//
// The noise floor is the median bin level. For a well-averaged spectrum
// that is the noise power per bin; for a single frame (exponentially
// distributed bins) it is 1.6 dB below it, so SNRs read up to 1.6 dB high.
// A peak is a bin above its two neighbours on each side. Its frequency and
// level come from a parabola through the peak bin and its neighbours in dB
// (quadratic interpolation, common practice): with the Hann window the
// frequency error is a few hundredths of a bin and most of the up-to-1.4 dB
// scalloping loss is restored (see the tests for measured bounds).
func FindCarriers(spectrumDB []float64, rate float64, minSNRDB float64) []Carrier {
	n := len(spectrumDB)
	if n < 5 {
		return nil
	}
	tmp := slices.Clone(spectrumDB)
	floor := median(tmp)
	var out []Carrier
	for i := 2; i < n-2; i++ {
		v := spectrumDB[i]
		if !(v > spectrumDB[i-1] && v >= spectrumDB[i+1] && v > spectrumDB[i-2] && v >= spectrumDB[i+2]) {
			continue
		}
		a, b, c := spectrumDB[i-1], v, spectrumDB[i+1]
		den := a - 2*b + c
		d := 0.0
		if den < 0 {
			d = 0.5 * (a - c) / den
		}
		level := b - 0.25*(a-c)*d
		snr := level - floor
		if snr < minSNRDB {
			continue
		}
		out = append(out, Carrier{
			OffsetHz: (float64(i) + d - float64(n/2)) * rate / float64(n),
			LevelDB:  level,
			SNRDB:    snr,
		})
	}
	slices.SortFunc(out, func(x, y Carrier) int {
		switch {
		case x.LevelDB > y.LevelDB:
			return -1
		case x.LevelDB < y.LevelDB:
			return 1
		}
		return 0
	})
	return out
}
