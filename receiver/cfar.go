package receiver

import (
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// cfarDesign is the burst detector's constant-false-alarm-rate design.
//
// The statistic: the mean channel power over a window of n consecutive
// readings, over the noise power a reading carries (the noise density
// from dsp.BandNoise times the channel filter's noise bandwidth). With
// noise alone a reading is the mean of |y|² over L channel samples of
// complex Gaussian noise whose autocorrelation R[m] is the channel
// filter's (dsp.Channelizer.NoiseACF), so the window mean has mean 1 and
// variance Σ_{|m|<L}(1−|m|/L)·R[m]²/(L·R[0]²) with L = n·(samples per
// reading). It is taken as gamma-distributed with that mean and variance
// (a moment-matched gamma, the Welch–Satterthwaite approximation for a
// weighted sum of chi-square variables; common practice), its shape k
// being the window's equivalent number of independent complex samples.
// The noise estimate's own relative error σ_N (from dsp.BandNoise) adds
// σ_N² to the variance.
//
// Thresholds: windows of 1, 2, 4 … readings up to about 0.32 s are all
// tested at every reading; a burst starts when any window's statistic
// exceeds its on-threshold, the (1 − p) quantile of its gamma law, with
// p = (design false alarms per hour)/(tests per hour) so that, by the
// union bound, noise alone starts no more bursts than the design rate
// (the windows overlap, so the real rate is lower). Long windows find
// weak bursts (at 0 dB CNR in 12.5 kHz a carrier lifts the channel power
// by 70 %, against a 7 % threshold at 0.32 s); short ones find strong
// bursts at once. Inside a burst, the channel counts as occupied while the
// mean over the burst's own window (the shortest that tells its level
// from the noise with margin) stays above the off-threshold, the
// (1 − 10⁻⁴) quantile (noise alone crosses it once in 10⁴ readings).
type cfarDesign struct {
	scales []int     // window lengths in readings, ascending
	shape  []float64 // gamma shape of a noise-only window mean, per scale
	pEval  float64   // false-alarm probability of one window test
	sdN    float64   // noise-estimate relative SD the thresholds hold for
	on     []float64 // thresholds in noise units, per scale
	off    []float64
}

// maxWindowS is the longest detection window.
const maxWindowS = 0.32

// newCFAR designs the detector for readings of readN channel samples,
// readingsPerS a second, whose noise has autocorrelation acf (lags 0 …),
// for falseAlarmsPerHour.
func newCFAR(acf []float64, readN int, readingsPerS, falseAlarmsPerHour float64) cfarDesign {
	var c cfarDesign
	for n := 1; float64(n) <= math.Max(1, maxWindowS*readingsPerS); n *= 2 {
		c.scales = append(c.scales, n)
		c.shape = append(c.shape, windowShape(acf, n*readN))
	}
	tests := readingsPerS * 3600 * float64(len(c.scales))
	c.pEval = falseAlarmsPerHour / tests
	c.on = make([]float64, len(c.scales))
	c.off = make([]float64, len(c.scales))
	c.sdN = -1
	return c
}

// offFalseOn is the probability that a window of noise alone reads above
// the off-threshold: the chance, per reading, that the quiet after a burst
// is taken for more of it.
const offFalseOn = 1e-4

// windowShape is the gamma shape k = L·R0²/Σ_{|m|<L}(1−|m|/L)·R[m]² of the
// mean of |y|² over L samples.
func windowShape(acf []float64, l int) float64 {
	r0 := acf[0]
	den := r0 * r0
	for m := 1; m < len(acf) && m < l; m++ {
		den += 2 * (1 - float64(m)/float64(l)) * acf[m] * acf[m]
	}
	return float64(l) * r0 * r0 / den
}

// setNoiseSD recomputes the thresholds for a noise estimate of relative
// SD sd, when it moved by more than 10 % since the last design.
func (c *cfarDesign) setNoiseSD(sd float64) {
	if c.sdN >= 0 && math.Abs(sd-c.sdN) <= 0.1*c.sdN {
		return
	}
	c.sdN = sd
	for i, k := range c.shape {
		kk := 1 / (1/k + sd*sd)
		g := distuv.Gamma{Alpha: kk, Beta: kk}
		c.on[i] = g.Quantile(1 - c.pEval)
		c.off[i] = g.Quantile(1 - offFalseOn)
	}
}

// scaleFor returns the index of the shortest window at which a burst of
// mean level s (noise units, noise included) stays above the
// off-threshold with margin: s − off ≥ 4·s/√k, about 3·10⁻⁵ of its
// windows falling below for a steady level.
func (c *cfarDesign) scaleFor(s float64) int {
	for i, k := range c.shape {
		if s-c.off[i] >= 4*s/math.Sqrt(k) {
			return i
		}
	}
	return len(c.scales) - 1
}
