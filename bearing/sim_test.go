package bearing

import (
	"math"
	"math/rand/v2"
	"nullseek/internal/angle"

	"gonum.org/v1/gonum/stat/distuv"
)

// sweep returns n headings starting at startDeg, stepDeg apart, and their
// times for a turn at rateDegS degrees per second.
func sweep(startDeg, stepDeg float64, n int, rateDegS float64) (h, t []float64) {
	h = make([]float64, n)
	t = make([]float64, n)
	for i := range h {
		h[i] = angle.Wrap360(startDeg + float64(i)*stepDeg)
		t[i] = float64(i) * math.Abs(stepDeg) / rateDegS
	}
	return h, t
}

// simThermal renders readings under the thermal model of CRBThermalDeg: each
// level is 10·log10 of a power averaged over M complex samples of a carrier
// of power S·p(θ−φ) plus complex Gaussian noise of unit power, drawn exactly
// as (N/2M)·[(√λ + Z)² + χ²(2M−1)], λ = 2M·S·p/N (noncentral χ², 2M dof).
// The noise floor is therefore 0 dB.
func simThermal(rng *rand.Rand, p Pattern, thetaDeg, snrDB float64, M int, h, t []float64) []Point {
	m := newModel(p)
	S := math.Pow(10, snrDB/10)
	chi := distuv.ChiSquared{K: float64(2*M - 1), Src: rng}
	pts := make([]Point, len(h))
	for i := range h {
		pw, _ := m.power(thetaDeg - h[i])
		lam := 2 * float64(M) * S * pw
		z := math.Sqrt(lam) + rng.NormFloat64()
		P := (z*z + chi.Rand()) / (2 * float64(M))
		pts[i] = Point{T: t[i], HeadingDeg: h[i], LevelDB: 10 * math.Log10(P)}
	}
	return pts
}

// simDB renders readings under the additive-dB model of CRBDBDeg (crb.go):
// level = levelDB + G(θ−φ) + N(0, σ²).
func simDB(rng *rand.Rand, p Pattern, thetaDeg, levelDB, sigmaDB float64, h, t []float64) []Point {
	m := newModel(p)
	pts := make([]Point, len(h))
	for i := range h {
		pts[i] = Point{T: t[i], HeadingDeg: h[i], LevelDB: levelDB + m.gainDB(thetaDeg-h[i]) + sigmaDB*rng.NormFloat64()}
	}
	return pts
}

// circErr is the error of est against truth modulo the pattern's period,
// in (−period/2, period/2].
func circErr(est, truth float64, symmetry int) float64 {
	period := 360 / float64(symmetry)
	d := math.Mod(angle.Wrap180(est-truth)+period/2+4*360, period) - period/2
	return d
}
