package bearing

import (
	"fmt"
	"math"
)

// CRBDBDeg is the Cramér–Rao bound (1-sigma, degrees) on the bearing for the
// additive-dB model (derived for this project; no published closed form
// was found): level_k = c + G(θ − φ_k) + e_k with
// e_k ~ N(0, sigmaDB²) and c unknown:
//
//	var(θ̂) ≥ σ² / [Σ g_k² − (Σ g_k)²/N],  g_k = G′(θ − φ_k) in dB per degree.
//
// headingsDeg are the readings' headings; the pattern slope comes from the
// same interpolation the fit uses. Returns +Inf when the headings carry no
// information (all slopes equal).
func CRBDBDeg(p Pattern, headingsDeg []float64, bearingDeg, sigmaDB float64) (float64, error) {
	if err := p.Validate(); err != nil {
		return 0, fmt.Errorf("crb: %w", err)
	}
	if !(sigmaDB > 0) || len(headingsDeg) < 2 {
		return 0, fmt.Errorf("crb: need sigma > 0 and at least 2 headings")
	}
	m := newModel(p)
	var sg, sg2 float64
	for _, h := range headingsDeg {
		_, g := m.gainSlopeDB(bearingDeg - h)
		sg += g
		sg2 += g * g
	}
	info := sg2 - sg*sg/float64(len(headingsDeg))
	if !(info > 0) {
		return math.Inf(1), nil
	}
	return sigmaDB / math.Sqrt(info), nil
}

// CRBThermalDeg is the Cramér–Rao bound (1-sigma, degrees) on the bearing for
// the thermal-noise model used by NoiseThermal and by the accuracy tests,
// derived here in the same way as CRBDBDeg but for this model.
//
// Model: reading k is the power averaged over M = samplesPerReading samples
// of a constant carrier of power S·p_k (p_k = pattern power at θ − φ_k) plus
// complex Gaussian noise of power N = 1. Its mean is μ_k = S·p_k + 1 and
// its variance v_k = (1 + 2·S·p_k)/M (exact moments of the scaled
// noncentral χ² with 2M degrees of freedom). SNR = S/N = 10^(snrDB/10), the
// carrier at the pattern's 0 dB direction over the noise power in the same
// reading. In the large-M Gaussian approximation with parameters (θ, S) the
// Fisher information is
//
//	I_ab = Σ_k [ ∂_aμ_k ∂_bμ_k / v_k + ½ ∂_av_k ∂_bv_k / v_k² ]
//
// and the bound is sqrt([I⁻¹]_θθ). The second (variance) term is at most
// 2/M of the first per reading; the exact noncentral-χ² information differs
// from this approximation by terms of relative order 1/M.
func CRBThermalDeg(p Pattern, headingsDeg []float64, bearingDeg, snrDB float64, samplesPerReading int) (float64, error) {
	if err := p.Validate(); err != nil {
		return 0, fmt.Errorf("crb: %w", err)
	}
	if samplesPerReading < 1 || len(headingsDeg) < 2 || math.IsNaN(snrDB) {
		return 0, fmt.Errorf("crb: need M ≥ 1, at least 2 headings and a finite SNR")
	}
	m := newModel(p)
	S := math.Pow(10, snrDB/10)
	M := float64(samplesPerReading)
	var itt, its, iss float64
	for _, h := range headingsDeg {
		pw, d := m.power(bearingDeg - h)
		v := (1 + 2*S*pw) / M
		mt, ms := S*d, pw
		vt, vs := 2*S*d/M, 2*pw/M
		itt += mt*mt/v + 0.5*vt*vt/(v*v)
		its += mt*ms/v + 0.5*vt*vs/(v*v)
		iss += ms*ms/v + 0.5*vs*vs/(v*v)
	}
	det := itt*iss - its*its
	if !(det > 0) {
		return math.Inf(1), nil
	}
	return math.Sqrt(iss / det), nil
}
