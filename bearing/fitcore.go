package bearing

import (
	"math"
	"nullseek/internal/angle"
	"sort"
)

// dbPerNeper is 10/ln 10: d(10·log10 x) = dbPerNeper·dx/x.
const dbPerNeper = 10 / math.Ln10

// Robust weights: a cell whose standardised residual |u| is at most
// robustFlat keeps its full weight, one beyond robustZero gets none, with
// a smooth bisquare step between (the redescending shape of Tukey's
// biweight, Beaton & Tukey, Technometrics 16(2), 1974, held flat near zero
// so that Gaussian data lose almost no efficiency: P(|u| > 4) = 6·10⁻⁵).
const (
	robustFlat = 4.0
	robustZero = 6.0
)

func robustWeight(u float64) float64 {
	a := math.Abs(u)
	switch {
	case a <= robustFlat:
		return 1
	case a >= robustZero:
		return 0
	}
	x := (a - robustFlat) / (robustZero - robustFlat)
	return (1 - x*x) * (1 - x*x)
}

// fadingModel is the part of the level that changes with time but not
// with heading: fading of the path, a transmitter whose power wanders. It
// is modelled in dB as a stationary Gauss–Markov (Ornstein–Uhlenbeck)
// process a(t) with variance Var (dB²) and correlation time TauS (s):
// cov(a(t), a(t+Δ)) = Var·exp(−|Δ|/TauS). It reaches a cell's level
// scaled by the cell's signal share h = (P̄ − N)/P̄ of the level seen
// (fading moves the carrier, not the noise). Var = 0: no fading.
type fadingModel struct {
	Var, TauS float64
}

// Variance modes of the thermal model (fitter.vmode).
const (
	// varModel: the variance of the model's level (the efficient choice
	// without fading).
	varModel = iota
	// varUniform: every reading the same variance in dB (robust to
	// fading, which moves every level by dB: the starting fit).
	varUniform
	// varData: the thermal variance of the level seen (under fading).
	varData
)

// fitter fits one sweep's cells.
type fitter struct {
	m       *model
	thermal bool
	floor   float64 // noise floor, dB (thermal)
	cells   []cell
	y       []float64 // cell levels (a copy, so that the bootstrap can swap it)

	// model at the last eval
	mu, jt, jc, v, h, r []float64
	act                 []bool    // takes part: unclipped, or clipped with the model below it
	w                   []float64 // robust weight in [0, 1]
	tau                 float64   // scale of v: 1/(samples per reading) thermal, σ² per reading dB
	fad                 fadingModel
	frozen              bool // eval keeps v and h (inside a Gauss–Newton step)
	vmode               int  // where the thermal variance comes from: varModel, varUniform, varData

	// whitened at the last whiten
	wr, wt, wc []float64 // residual, ∂/∂θ, ∂/∂c, each over √F
	obs        []bool    // observed by the Kalman filter at the last whiten
	rho        []float64 // exp(−Δt/rhoTC) per cell (kalman's cache)
	rhoTC      float64
	po         []float64 // cell power over the noise, ≥ 1 (thermal)
	wBase      []float64 // upper bound of the robust weights (nil: none)
	vt         []float64 // v without the model-error share
	k2         float64   // model-error variance, dB² (thermal, see estimateScale)
	rAdj       []float64 // subtracted from the residuals by profile (nil: none)
	maxTauS    float64   // longest fading correlation time profile tries
}

func newFitter(m *model, cells []cell, thermal bool, floor float64) *fitter {
	n := len(cells)
	f := &fitter{m: m, thermal: thermal, floor: floor, cells: cells, y: make([]float64, n),
		mu: make([]float64, n), jt: make([]float64, n), jc: make([]float64, n), v: make([]float64, n),
		h: make([]float64, n), r: make([]float64, n), act: make([]bool, n), w: make([]float64, n),
		wr: make([]float64, n), wt: make([]float64, n), wc: make([]float64, n), obs: make([]bool, n), vt: make([]float64, n)}
	f.po = make([]float64, n)
	for k, c := range cells {
		f.y[k] = c.y
		f.w[k] = 1
		f.po[k] = math.Max(math.Pow(10, (c.y-floor)/10), 1)
	}
	return f
}

// eval fills the model, its derivatives and the residuals at (theta, c),
// and — unless the variance is frozen (f.frozen) — the variance shape v
// and the signal share h there. c is the carrier level in dB at the
// pattern's 0 dB direction (LevelDB scale). Thermal model, per cell of n
// readings each averaging M = 1/tau samples (noise power N = 1 after
// dividing by the floor, carrier S = 10^((c−floor)/10)):
//
//	E[P̄] = S·p + 1,  var[P̄] = tau·(1 + 2·S·p)/n,
//	mean of 10·log10 P̄ ≈ 10·log10(S·p + 1) − dbPerNeper·var/(2·(S·p+1)²),
//	var of 10·log10 P̄ ≈ dbPerNeper²·var/(S·p + 1)²   (delta method).
//
// Additive-dB model: mean c + G(θ − φ), variance tau/n.
//
// The Gauss–Newton loops freeze v and h during each step (iteratively
// reweighted least squares, as for a generalised linear model: McCullagh &
// Nelder, Generalized Linear Models, 2nd ed., 1989, §2.5): a variance that
// followed every trial step would let the fit lower its cost by moving the
// carrier into the noise, where the thermal variance is largest.
func (f *fitter) eval(theta, c float64) {
	var S float64
	if f.thermal {
		S = math.Pow(10, (c-f.floor)/10)
	}
	// The bias of the mean of a logarithm needs the samples per reading
	// (1/tau); a tau inflated by misfit or fading is capped at 1/20 (the
	// receiver averages more than 20 samples per reading).
	tb := math.Min(f.tau, 0.05)
	for k, cl := range f.cells {
		x := theta - cl.h
		if f.thermal {
			pw, d := f.m.power(x)
			sp := S * pw
			ml := sp + 1
			shape := (1 + 2*sp) / cl.n
			f.mu[k] = f.floor + dbPerNeper*math.Log(ml) - dbPerNeper*tb*shape/(2*ml*ml)
			f.jt[k] = dbPerNeper * S * d / ml
			f.jc[k] = sp / ml
			switch {
			case f.frozen:
			case f.vmode == varUniform:
				f.v[k] = 1 / cl.n
				f.h[k] = 1 - 1/f.po[k]
			case f.vmode == varData:
				// Under fading the variance comes from the level seen:
				// the fading moves the carrier's level, so the model's
				// would follow a guess of it (and a guess that put the
				// carrier in the noise would look cheapest).
				// The signal share is the model's: the data's would
				// let the noise explain a null (a carrier guessed into
				// the noise everywhere would look cheapest).
				po := f.po[k]
				f.v[k] = dbPerNeper * dbPerNeper * (2*po - 1) / (cl.n * po * po)
				f.h[k] = sp / ml
			default:
				f.v[k] = dbPerNeper * dbPerNeper * shape / (ml * ml)
				f.h[k] = sp / ml
			}
			if !f.frozen {
				f.vt[k] = f.v[k]
				if f.k2 > 0 && f.tau > 0 && f.vmode == varModel {
					// the model's own error, the same in dB at every level
					f.v[k] += f.k2 / f.tau
				}
			}
		} else {
			g, s := f.m.gainSlopeDB(x)
			f.mu[k] = c + g
			f.jt[k] = s
			f.jc[k] = 1
			f.v[k] = 1 / cl.n
			f.h[k] = 1
		}
		f.r[k] = f.y[k] - f.mu[k]
		f.act[k] = !cl.clipped || f.r[k] > 0
	}
}

// whiteSSE is Σ w·r²/v over the active cells at the last eval.
func (f *fitter) whiteSSE() float64 {
	var s float64
	for k := range f.r {
		if f.act[k] {
			s += f.w[k] * f.r[k] * f.r[k] / f.v[k]
		}
	}
	return s
}

// whiteNormal is JᵀWJ and JᵀWr (W = w/v) at the last eval.
func (f *fitter) whiteNormal() (a11, a12, a22, b1, b2 float64) {
	for k := range f.r {
		if !f.act[k] {
			continue
		}
		wk := f.w[k] / f.v[k]
		a11 += wk * f.jt[k] * f.jt[k]
		a12 += wk * f.jt[k] * f.jc[k]
		a22 += wk * f.jc[k] * f.jc[k]
		b1 += wk * f.jt[k] * f.r[k]
		b2 += wk * f.jc[k] * f.r[k]
	}
	return
}

// start is a level c to start Gauss–Newton from at theta.
func (f *fitter) start(theta float64) float64 {
	var num, den float64
	for k, cl := range f.cells {
		if cl.clipped {
			continue
		}
		if f.thermal {
			pw, _ := f.m.power(theta - cl.h)
			num += cl.n * pw * (math.Pow(10, (f.y[k]-f.floor)/10) - 1)
			den += cl.n * pw * pw
		} else {
			num += cl.n * (f.y[k] - f.m.gainDB(theta-cl.h))
			den += cl.n
		}
	}
	if den == 0 {
		return f.floor
	}
	if f.thermal {
		return f.floor + 10*math.Log10(math.Max(num/den, 1e-6))
	}
	return num / den
}

// step is a Gauss–Newton step from (theta, c) with normal equations a, b,
// halved until obj does not grow; it returns the new point and whether the
// step was taken.
func gnStep(theta, c, a11, a12, a22, b1, b2 float64, obj func(t, c float64) float64, cur float64) (float64, float64, bool, float64) {
	det := a11*a22 - a12*a12
	if !(det > 0) {
		return theta, c, false, 0
	}
	dt := (a22*b1 - a12*b2) / det
	dc := (a11*b2 - a12*b1) / det
	if s := math.Max(math.Abs(dt)/5, math.Abs(dc)/10); s > 1 {
		dt /= s
		dc /= s
	}
	step := 1.0
	for tries := 0; tries < 30; tries++ {
		nt, nc := theta+step*dt, c+step*dc
		if obj(nt, nc) <= cur*(1+1e-12) {
			return nt, nc, true, math.Abs(step * dt)
		}
		step /= 2
	}
	return theta, c, false, 0
}

// whiteGN refines (theta, c) under independent cell errors with the
// current robust weights (iteratively reweighted: v follows the model).
func (f *fitter) whiteGN(theta, c float64) (float64, float64) {
	obj := func(t, cc float64) float64 { f.eval(t, cc); return f.whiteSSE() }
	for it := 0; it < 60; it++ {
		f.frozen = false
		f.eval(theta, c)
		f.frozen = true
		cur := f.whiteSSE()
		a11, a12, a22, b1, b2 := f.whiteNormal()
		var ok bool
		var moved float64
		theta, c, ok, moved = gnStep(theta, c, a11, a12, a22, b1, b2, obj, cur)
		if !ok || moved < 1e-5 {
			break
		}
	}
	f.frozen = false
	f.eval(theta, c)
	return angle.Wrap360(theta), c
}

// estimateScale sets tau robustly from the residuals at the last eval: the
// median of r²/v over the observed cells over the median of χ²₁ (0.4549).
//
// In the thermal model without fading (varModel) it also sets k2, the variance
// of an error of the model itself that is the same in dB at every level —
// a site's ripple on the pattern, a pattern a little off — which the
// thermal variance, tiny for a strong carrier, does not allow for: tau
// from the weaker half of the cells (where the noise rules), k2 from the
// stronger half, less the noise tau gives them (both medians over 0.4549).
// Without it the robust weights would take a 1 dB ripple on a 30 dB
// carrier for an outlier.
func (f *fitter) estimateScale() {
	type rv struct{ r2, vt float64 }
	var q []rv
	for k, cl := range f.cells {
		if cl.clipped || f.w[k] == 0 {
			continue
		}
		q = append(q, rv{f.r[k] * f.r[k], f.vt[k]})
	}
	if len(q) == 0 {
		return
	}
	if !f.thermal || f.vmode != varModel || len(q) < 20 {
		var rs []float64
		for k, cl := range f.cells {
			if cl.clipped || f.w[k] == 0 {
				continue
			}
			rs = append(rs, f.r[k]*f.r[k]/f.v[k])
		}
		if t := median(rs) / 0.4549; t > 0 {
			f.tau = t
		}
		if f.k2 != 0 {
			f.k2 = 0
			copy(f.v, f.vt)
		}
		return
	}
	sort.Slice(q, func(i, j int) bool { return q[i].vt < q[j].vt })
	half := len(q) / 2
	var weak, strong, sv []float64
	for _, x := range q[half:] {
		weak = append(weak, x.r2/x.vt)
	}
	for _, x := range q[:half] {
		strong = append(strong, x.r2)
		sv = append(sv, x.vt)
	}
	tau := median(weak) / 0.4549
	if !(tau > 0) {
		return
	}
	f.tau = tau
	f.k2 = math.Max(0, median(strong)/0.4549-tau*median(sv))
	for k := range f.v {
		f.v[k] = f.vt[k] + f.k2/f.tau
	}
}

// trim gives weight 1 to the share keep of unclipped cells with the
// smallest standardised residuals at the last eval and 0 to the rest;
// it reports whether the selection changed.
func (f *fitter) trim(keep float64) bool {
	var u []float64
	for k, cl := range f.cells {
		if !cl.clipped {
			u = append(u, math.Abs(f.r[k])/math.Sqrt(f.v[k]))
		}
	}
	if len(u) == 0 {
		return false
	}
	s := append([]float64(nil), u...)
	sort.Float64s(s)
	cut := s[min(len(s)-1, int(keep*float64(len(s))))]
	changed := false
	i := 0
	for k, cl := range f.cells {
		if cl.clipped {
			continue
		}
		w := 0.0
		if u[i] <= cut {
			w = 1
		}
		if w != f.w[k] {
			changed = true
		}
		f.w[k] = w
		i++
	}
	return changed
}

// reweight sets the robust weights from the residuals at the last eval,
// standardised by the noise (tau·v) and the fading (h²·Var); a cell never
// gets back more weight than wBase (when set) allows.
func (f *fitter) reweight() {
	for k, cl := range f.cells {
		if cl.clipped {
			f.w[k] = 1
			continue
		}
		s2 := f.tau*f.v[k] + f.h[k]*f.h[k]*f.fad.Var
		f.w[k] = robustWeight(f.r[k] / math.Sqrt(s2))
		if f.wBase != nil {
			f.w[k] = math.Min(f.w[k], f.wBase[k])
		}
	}
}

// headingStructure is, per cell, the part of the residual at the last
// eval that repeats with heading: the mean residual of the cells used in
// the same 5° sector over all passes (0 in a sector seen only once). With
// one pass it is all zero: heading and time cannot be told apart.
func (f *fitter) headingStructure(passes float64) []float64 {
	out := make([]float64, len(f.cells))
	if passes < 1.8 {
		return out
	}
	const sector = 5
	var sum, cnt [360 / sector]float64
	var first, last [360 / sector]float64
	for k := range first {
		first[k], last[k] = math.Inf(1), math.Inf(-1)
	}
	for k, cl := range f.cells {
		if cl.clipped || f.w[k] == 0 {
			continue
		}
		i := int(cl.h/sector) % len(sum)
		sum[i] += f.w[k] * f.r[k]
		cnt[i] += f.w[k]
		first[i] = math.Min(first[i], cl.t)
		last[i] = math.Max(last[i], cl.t)
	}
	// a sector counts as seen twice when its cells span more than half a
	// pass in time
	span := (f.cells[len(f.cells)-1].t - f.cells[0].t) / passes
	for k, cl := range f.cells {
		i := int(cl.h/sector) % len(sum)
		if cnt[i] > 0 && last[i]-first[i] > span/2 {
			out[k] = sum[i] / cnt[i]
		}
	}
	return out
}

// kalman runs the filter of the fading model over the residuals (and, with
// jac, the Jacobian columns) of the unclipped cells with weight > 0, in
// time order, with observation noise tau·v/w. It fills wr, wt, wc, obs
// (divided by √F) and returns Σ log F and the number of cells observed.
//
// The residual r_k = h_k·a(t_k) + e_k; a is the Gauss–Markov state:
// a_k = ρ·a_{k−1} + η, ρ = exp(−Δt/TauS), var η = Var·(1 − ρ²). The
// innovations form of the filter whitens the residuals and, run on the
// regression columns with the same gains, the Jacobian: generalised least
// squares with the fading's covariance (Harvey, Forecasting, Structural
// Time Series Models and the Kalman Filter, 1989, §3.4; common practice).
func (f *fitter) kalman(fm fadingModel, tau float64, jac bool) (sumLogF float64, nobs int) {
	return f.kalmanRun(fm, tau, jac, true)
}

// rhos returns, per cell, exp(−Δt/tc) from the cell before (cached per tc).
func (f *fitter) rhos(tc float64) []float64 {
	if f.rhoTC == tc && f.rho != nil {
		return f.rho
	}
	if f.rho == nil {
		f.rho = make([]float64, len(f.cells))
	}
	for k := 1; k < len(f.cells); k++ {
		f.rho[k] = math.Exp(-(f.cells[k].t - f.cells[k-1].t) / tc)
	}
	f.rhoTC = tc
	return f.rho
}

func (f *fitter) kalmanRun(fm fadingModel, tau float64, jac, wantLog bool) (sumLogF float64, nobs int) {
	var x, xt, xc, P float64
	P = fm.Var
	var rho []float64
	if fm.Var > 0 {
		rho = f.rhos(fm.TauS)
	}
	acc := 1.0 // product of ρ since the last observed cell
	started := false
	for k, cl := range f.cells {
		f.obs[k] = false
		if rho != nil && k > 0 {
			acc *= rho[k]
		}
		if cl.clipped || f.w[k] <= 1e-9 {
			continue
		}
		if rho != nil && started {
			x *= acc
			xt *= acc
			xc *= acc
			P = acc*acc*P + fm.Var*(1-acc*acc)
		}
		acc = 1
		started = true
		hk := f.h[k]
		R := tau * f.v[k] / f.w[k]
		F := hk*hk*P + R
		sf := math.Sqrt(F)
		e := f.r[k] - hk*x
		f.wr[k] = e / sf
		var K float64
		if rho != nil {
			K = P * hk / F
		}
		if jac {
			et := f.jt[k] - hk*xt
			ec := f.jc[k] - hk*xc
			f.wt[k] = et / sf
			f.wc[k] = ec / sf
			xt += K * et
			xc += K * ec
		}
		if rho != nil {
			x += K * e
			P *= 1 - K*hk
		}
		f.obs[k] = true
		if wantLog {
			sumLogF += math.Log(F)
		}
		nobs++
	}
	return sumLogF, nobs
}

// glsObjective is −2·log-likelihood at the last eval, less Σ log F (which
// the frozen variance keeps constant inside a step): the whitened
// residuals of the observed cells plus the censoring terms of the clipped
// cells whose model lies below them.
func (f *fitter) glsObjective() float64 {
	// Σ log F does not change inside a Gauss–Newton step (v, h frozen).
	f.kalmanRun(f.fad, f.tau, false, false)
	var s float64
	for k, cl := range f.cells {
		if f.obs[k] {
			s += f.wr[k] * f.wr[k]
		} else if cl.clipped && f.act[k] {
			s += f.r[k] * f.r[k] / (f.tau * f.v[k])
		}
	}
	return s
}

// glsNormal is the GLS normal matrix and right side at the last eval
// (after kalman with jac), including the censoring terms.
func (f *fitter) glsNormal() (a11, a12, a22, b1, b2 float64) {
	for k, cl := range f.cells {
		switch {
		case f.obs[k]:
			a11 += f.wt[k] * f.wt[k]
			a12 += f.wt[k] * f.wc[k]
			a22 += f.wc[k] * f.wc[k]
			b1 += f.wt[k] * f.wr[k]
			b2 += f.wc[k] * f.wr[k]
		case cl.clipped && f.act[k]:
			wk := 1 / (f.tau * f.v[k])
			a11 += wk * f.jt[k] * f.jt[k]
			a12 += wk * f.jt[k] * f.jc[k]
			a22 += wk * f.jc[k] * f.jc[k]
			b1 += wk * f.jt[k] * f.r[k]
			b2 += wk * f.jc[k] * f.r[k]
		}
	}
	return
}

// glsGN refines (theta, c) under the current noise and fading model.
func (f *fitter) glsGN(theta, c float64) (float64, float64) {
	obj := func(t, cc float64) float64 { f.eval(t, cc); return f.glsObjective() }
	for it := 0; it < 40; it++ {
		f.frozen = false
		f.eval(theta, c)
		f.frozen = true
		cur := f.glsObjective()
		f.kalman(f.fad, f.tau, true)
		a11, a12, a22, b1, b2 := f.glsNormal()
		var ok bool
		var moved float64
		theta, c, ok, moved = gnStep(theta, c, a11, a12, a22, b1, b2, obj, cur)
		if !ok || moved < 1e-5 {
			break
		}
	}
	f.frozen = false
	f.eval(theta, c)
	f.kalman(f.fad, f.tau, true)
	return angle.Wrap360(theta), c
}

// maxFadingVar caps the fading variance at (15 dB)²: deeper than Rayleigh
// fading (5.6 dB RMS, the exponential distribution of power in dB, common
// practice) by far.
const maxFadingVar = 225.0

// profile is the noise and fading model that maximises the likelihood of
// the residuals at the last eval, with tau profiled out: the fading
// variance as a multiple λ of tau on a logarithmic grid (capped at
// maxFadingVar), its correlation time on a grid from 0.05 s to 6 s (fading
// of a path whose Doppler is 0.1 Hz or more decorrelates within 4 s: the
// first zero of J0(2π·fD·τ), Clarke's model, common practice; slower
// changes are a trend, and a longer time would let the fading model
// absorb the pattern itself),
// refined once around the best. It returns the model, its tau, twice the
// log-likelihood gain over no fading (a likelihood-ratio statistic, two
// extra parameters) and the robust −2·log-likelihood of the whole sweep
// (cells the robust weights left out count as robustZero² each). With
// rAdj set it works on the residuals less rAdj (the heading structure:
// level changes that repeat with heading are not fading).
func (f *fitter) profile() (fadingModel, float64, float64, float64) {
	if f.rAdj != nil {
		r0 := append([]float64(nil), f.r...)
		for k := range f.r {
			f.r[k] -= f.rAdj[k]
		}
		defer copy(f.r, r0)
	}
	ll := func(fm fadingModel) (float64, float64) {
		slf, n := f.kalman(fm, 1, false)
		if n == 0 {
			return math.Inf(-1), 1
		}
		var s float64
		for k := range f.cells {
			if f.obs[k] {
				s += f.wr[k] * f.wr[k]
			}
		}
		tau := s / float64(n)
		if !(tau > 0) || fm.Var*tau > maxFadingVar {
			return math.Inf(-1), 1
		}
		return -0.5 * (slf + float64(n)*math.Log(tau) + float64(n)), tau
	}
	l0, tau0 := ll(fadingModel{})
	best, bestL, bestTau := fadingModel{}, l0, tau0
	// λ spans the ratio of fading variance (dB²) to the per-cell noise
	// variance scale; the noise of a 25 dB reading is ~10⁻³ dB².
	for _, tc := range []float64{0.05, 0.1, 0.2, 0.4, 0.8, 1.5, 3, 6, 12, 24} {
		if tc > f.maxTauS {
			break
		}
		for e := -2.0; e <= 6; e++ {
			fm := fadingModel{Var: math.Pow(10, e), TauS: tc}
			if l, t := ll(fm); l > bestL {
				best, bestL, bestTau = fm, l, t
			}
		}
	}
	if best.Var > 0 {
		b := best
		for _, ft := range []float64{0.6, 0.8, 1, 1.25, 1.6} {
			for _, fv := range []float64{0.3, 0.5, 0.7, 1, 1.4, 2, 3} {
				fm := fadingModel{Var: b.Var * fv, TauS: math.Min(b.TauS*ft, f.maxTauS)}
				if l, t := ll(fm); l > bestL {
					best, bestL, bestTau = fm, l, t
				}
			}
		}
	}
	// Var was relative to tau: make it absolute.
	best.Var *= bestTau
	loss := -2 * bestL
	f.kalman(best, bestTau, false)
	for k, cl := range f.cells {
		if !cl.clipped && !f.obs[k] {
			loss += math.Log(bestTau*f.v[k]+f.h[k]*f.h[k]*best.Var) + robustZero*robustZero
		}
	}
	return best, bestTau, 2 * (bestL - l0), loss
}

// fisher is the bearing's 1-sigma from the normal matrix (degrees).
func fisherSigma(a11, a12, a22 float64) float64 {
	det := a11*a22 - a12*a12
	if !(det > 0) || !(a22 > 0) {
		return math.Inf(1)
	}
	return math.Sqrt(a22 / det)
}

// scores are the per-cell contributions to the efficient score for θ (c
// profiled out) at the last whiten, with the cell's heading and time.
func (f *fitter) scores(a11, a12, a22 float64) (g, hd []float64) {
	for k, cl := range f.cells {
		switch {
		case f.obs[k]:
			g = append(g, f.wr[k]*(f.wt[k]-a12/a22*f.wc[k]))
		case cl.clipped && f.act[k]:
			wk := 1 / (f.tau * f.v[k])
			g = append(g, wk*f.r[k]*(f.jt[k]-a12/a22*f.jc[k]))
		default:
			continue
		}
		hd = append(hd, cl.h)
	}
	return g, hd
}

// hacSigma is the bearing's 1-sigma from a sandwich (Newey–West, Bartlett
// weights) estimate of the variance of the efficient score, over the
// scores in the given order (circularly when circular), with bandwidth L.
// Residuals that are correlated along that order — site multipath or a
// pattern that does not quite fit, when ordered by heading — make the
// Fisher information, which counts every cell as independent, understate
// the error; this does not. For independent residuals it agrees with the
// Fisher sigma on average (Newey & West, Econometrica 55(3), 1987; the
// HAC estimator is common practice in regression with serially correlated
// errors).
func hacSigma(g []float64, ieff float64, L int, circular bool) float64 {
	n := len(g)
	if n < 4 || !(ieff > 0) {
		return 0
	}
	L = max(1, min(L, n-1))
	var v float64
	for k := range g {
		v += g[k] * g[k]
	}
	for l := 1; l <= L; l++ {
		wt := 1 - float64(l)/float64(L+1)
		var acc float64
		for k := 0; k < n; k++ {
			j := k + l
			if j >= n {
				if !circular {
					break
				}
				j -= n
			}
			acc += g[k] * g[j]
		}
		v += 2 * wt * acc
	}
	if !(v > 0) {
		return 0
	}
	return math.Sqrt(v) / ieff
}

// headingOrder sorts the scores by heading.
func headingOrder(g, hd []float64) []float64 {
	idx := make([]int, len(g))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool { return hd[idx[a]] < hd[idx[b]] })
	out := make([]float64, len(g))
	for i, j := range idx {
		out[i] = g[j]
	}
	return out
}

// jackknife is the delete-one-block jackknife sigma of the bearing (Quenouille
// 1956; Efron & Stein, Annals of Statistics 9(3), 1981, for the variance
// estimate (B−1)/B·Σ(θ₋ᵦ − θ̄)²) over B blocks of consecutive cells, each
// as long as one pass round the circle: blocks far apart in time share
// little of the fading, so the spread of the refits shows how much the
// fading moved the bearing, whatever its spectrum. The refits use the
// current noise and fading model and start from (theta, c). 0 when fewer
// than 3 blocks.
func (f *fitter) jackknife(theta, c float64, blocks int, period float64) float64 {
	if blocks < 3 {
		return 0
	}
	n := len(f.cells)
	w0 := append([]float64(nil), f.w...)
	defer func() {
		copy(f.w, w0)
		f.eval(theta, c)
	}()
	// block boundaries: equal shares of the heading travelled
	var total float64
	travel := make([]float64, n)
	for k := 1; k < n; k++ {
		total += math.Abs(angle.Wrap180(f.cells[k].h - f.cells[k-1].h))
		travel[k] = total
	}
	var ts []float64
	for b := 0; b < blocks; b++ {
		for k := range f.w {
			blk := int(float64(blocks) * travel[k] / (total + 1e-9))
			if blk == b {
				f.w[k] = 0
			} else {
				f.w[k] = w0[k]
			}
		}
		t, _ := f.glsGN(theta, c)
		ts = append(ts, theta+math.Mod(angle.Wrap180(t-theta)+period/2+4*360, period)-period/2)
	}
	var mean float64
	for _, t := range ts {
		mean += t
	}
	mean /= float64(len(ts))
	var ss float64
	for _, t := range ts {
		ss += (t - mean) * (t - mean)
	}
	return math.Sqrt(float64(blocks-1) / float64(blocks) * ss)
}

// sectorJackknife refits the bearing with the cells of one heading sector
// left out at a time: sectors equal slices of the circle, the first centred
// on featureHeading (where the pattern's feature was seen). It returns the
// jackknife standard error of the bearing over the refits that worked,
// sqrt((n-1)/n · Σ(θk − θ̄)²) (Efron & Tibshirani 1993, An Introduction to
// the Bootstrap, eq. 11.5), the largest move from theta, and n. A sector
// holding no cell adds no refit.
func (f *fitter) sectorJackknife(theta, c, featureHeading float64, sectors int, period float64, gls bool) (se, moved float64, n int) {
	w0 := append([]float64(nil), f.w...)
	defer func() {
		copy(f.w, w0)
		f.eval(theta, c)
	}()
	width := 360 / float64(sectors)
	var ts []float64
	for s := 0; s < sectors; s++ {
		left := 0
		for k, cl := range f.cells {
			if int(angle.Wrap360(cl.h-featureHeading+width/2)/width)%sectors == s {
				f.w[k] = 0
				left++
			} else {
				f.w[k] = w0[k]
			}
		}
		if left == 0 {
			continue
		}
		var t float64
		if gls {
			t, _ = f.glsGN(theta, c)
		} else {
			t, _ = f.whiteGN(theta, c)
		}
		d := math.Mod(angle.Wrap180(t-theta)+period/2+4*360, period) - period/2
		if math.IsNaN(d) {
			continue
		}
		ts = append(ts, d)
		moved = math.Max(moved, math.Abs(d))
	}
	n = len(ts)
	if n < 2 {
		return 0, moved, n
	}
	var mean, ss float64
	for _, d := range ts {
		mean += d
	}
	mean /= float64(n)
	for _, d := range ts {
		ss += (d - mean) * (d - mean)
	}
	return math.Sqrt(float64(n-1) / float64(n) * ss), moved, n
}
