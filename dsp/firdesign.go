package dsp

import (
	"math"
)

// KaiserBeta returns the Kaiser window shape parameter β for a filter with
// attenDB dB of stopband attenuation (a positive number), using Kaiser's
// empirical formula exactly as scipy.signal.kaiser_beta does:
//
//	β = 0.1102(A−8.7)                       for A > 50
//	β = 0.5842(A−21)^0.4 + 0.07886(A−21)    for 21 < A ≤ 50
//	β = 0                                   for A ≤ 21
func KaiserBeta(attenDB float64) float64 {
	a := attenDB
	switch {
	case a > 50:
		return 0.1102 * (a - 8.7)
	case a > 21:
		return 0.5842*math.Pow(a-21, 0.4) + 0.07886*(a-21)
	default:
		return 0
	}
}

// KaiserOrd returns the number of taps and the Kaiser β of a windowed-sinc
// FIR whose passband and stopband deviations are both at most rippleDB
// (the attenuation in dB, sign ignored, as in scipy.signal.kaiserord) and
// whose transition width is width, a fraction of the Nyquist frequency
// (1 = Nyquist). Like scipy it uses N = ceil((A−7.95)/(2.285·π·width) + 1).
// For A < 8 dB or width ≤ 0 the formula is outside its range: KaiserOrd then
// returns (0, 0).
func KaiserOrd(rippleDB, width float64) (numtaps int, beta float64) {
	a := math.Abs(rippleDB)
	if a < 8 || !(width > 0) {
		return 0, 0
	}
	beta = KaiserBeta(a)
	n := (a-7.95)/2.285/(math.Pi*width) + 1
	return int(math.Ceil(n)), beta
}

// besselI0 is the modified Bessel function of the first kind, order 0,
// by its power series (converges for all x; adequate to ~1e-16 relative for
// the β ≤ 20 range used by Kaiser windows).
func besselI0(x float64) float64 {
	sum, term := 1.0, 1.0
	q := x * x / 4
	for k := 1; k < 500; k++ {
		term *= q / float64(k*k)
		sum += term
		if term < sum*1e-17 {
			break
		}
	}
	return sum
}

// KaiserWindow returns the symmetric Kaiser window of n points with shape β
// (scipy.signal.windows.kaiser(n, beta, sym=True)). n ≤ 0 gives nil; n = 1
// gives [1].
func KaiserWindow(n int, beta float64) []float64 {
	if n <= 0 {
		return nil
	}
	w := make([]float64, n)
	if n == 1 {
		w[0] = 1
		return w
	}
	den := besselI0(beta)
	for i := range w {
		r := 2*float64(i)/float64(n-1) - 1
		w[i] = besselI0(beta*math.Sqrt(math.Max(0, 1-r*r))) / den
	}
	return w
}

func sinc(x float64) float64 {
	if x == 0 {
		return 1
	}
	px := math.Pi * x
	return math.Sin(px) / px
}

// FirwinLowpass designs a linear-phase low-pass FIR of numtaps taps with a
// Kaiser window of shape beta, matching
// scipy.signal.firwin(numtaps, cutoff, window=('kaiser', beta)): cutoff is
// the −6 dB point as a fraction of Nyquist (0 < cutoff < 1) and the taps are
// scaled to unity gain at DC. Out-of-range arguments (numtaps < 1, cutoff
// outside (0, 1)) give nil.
func FirwinLowpass(numtaps int, cutoff, beta float64) []float64 {
	if numtaps < 1 || !(cutoff > 0 && cutoff < 1) {
		return nil
	}
	h := make([]float64, numtaps)
	alpha := 0.5 * float64(numtaps-1)
	win := KaiserWindow(numtaps, beta)
	s := 0.0
	for i := range h {
		m := float64(i) - alpha
		h[i] = cutoff * sinc(cutoff*m) * win[i]
		s += h[i]
	}
	for i := range h {
		h[i] /= s
	}
	return h
}
