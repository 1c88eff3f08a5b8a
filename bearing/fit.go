package bearing

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"nullseek/internal/angle"
	"sort"

	"gonum.org/v1/gonum/dsp/fourier"
)

// Point is one level reading taken while the antenna turned.
type Point struct {
	// T is the reading's time in seconds (any origin; used for trend and lag).
	T float64
	// HeadingDeg is the antenna boresight heading, degrees clockwise.
	HeadingDeg float64
	// LevelDB is the received level in dB (any fixed reference, e.g. dBFS).
	LevelDB float64
	// Clipped marks a reading taken while the receiver was clipping; such
	// readings are left out of the fit and reported as a warning.
	Clipped bool
}

// NoiseModel selects how the level readings' errors are modelled.
type NoiseModel int

const (
	// NoiseAuto uses NoiseThermal when FitOptions.NoiseFloorDB is set and
	// NoiseDB otherwise.
	NoiseAuto NoiseModel = iota
	// NoiseDB: level = c + G(θ−φ) + e with e ~ N(0, σ²) in dB, σ constant and
	// estimated from the residuals. This is the model of the bound derived in
	// REFERENCES §6. Fitted in dB; c in closed form (jointly in Gauss–Newton).
	NoiseDB
	// NoiseThermal: each reading is a power averaged over many samples of a
	// constant carrier plus complex Gaussian noise of known power N (the noise
	// floor): E[P] = S·p(θ−φ) + N, Var[P] ∝ N² + 2·S·p·N. Fitted in the linear
	// power domain by iteratively reweighted Gauss–Newton, so that a null
	// filled by noise is modelled instead of being mistaken for the pattern's
	// null. The variance scale (1/samples per reading) is estimated from the
	// residuals.
	NoiseThermal
)

// String names the model.
func (n NoiseModel) String() string {
	switch n {
	case NoiseAuto:
		return "auto"
	case NoiseDB:
		return "db"
	case NoiseThermal:
		return "thermal"
	}
	return fmt.Sprintf("noise(%d)", int(n))
}

// FitOptions tunes Fit. The zero value gives the defaults.
type FitOptions struct {
	// BinDeg is the heading bin width in degrees (default 1; range 0.1..10).
	BinDeg float64
	// NoiseFloorDB, when set, is the level of the noise alone on the LevelDB
	// scale (from the receiver's noise estimate); it enables NoiseThermal.
	NoiseFloorDB *float64
	// Noise selects the error model (default NoiseAuto).
	Noise NoiseModel
	// MinPoints is the fewest usable (unclipped) points accepted (default 20).
	MinPoints int
	// MinCoverageDeg is the least sweep coverage accepted (default 90°).
	MinCoverageDeg float64
	// MaxGapDeg: gaps between neighbouring headings no wider than this count
	// as covered (default 10°).
	MaxGapDeg float64
	// Bootstrap is the number of residual-bootstrap refits (0 → 100,
	// negative → no bootstrap).
	Bootstrap int
	// Seed seeds the bootstrap's random numbers (runs are reproducible).
	Seed uint64
}

// Estimate is a fitted bearing.
type Estimate struct {
	// BearingDeg is the transmitter's bearing, degrees clockwise in [0, 360),
	// in the heading source's reference (true north if the headings are true).
	BearingDeg float64
	// SigmaDeg is the reported 1-sigma uncertainty: FisherSigmaDeg, or the
	// bootstrap's value when that is more than twice as large (with a warning).
	SigmaDeg float64
	// AltBearingDeg is the equally good alternative bearing of an ambiguous
	// pattern (BearingDeg + 360°/Symmetry), nil for an unambiguous one.
	AltBearingDeg *float64
	// NullDepthDB: for a Null pattern, the highest smoothed level minus the
	// level measured at the fitted null; for a Peak pattern, the span between
	// the highest and lowest smoothed levels.
	NullDepthDB float64
	// ResidualDB is the RMS of binned level minus fitted level, dB.
	ResidualDB float64
	// CoverageDeg is the part of the circle the headings covered, degrees.
	CoverageDeg float64
	// Points is the number of readings used (clipped ones excluded).
	Points int
	// Mode is the pattern's mode (which feature marked the bearing).
	Mode Mode
	// Noise is the error model that was used.
	Noise NoiseModel
	// LevelDB is the fitted carrier level at the pattern's 0 dB direction
	// (without the noise), on the LevelDB scale.
	LevelDB float64
	// NoiseFloorDB is the noise floor the thermal model used (0 for NoiseDB).
	NoiseFloorDB float64
	// FisherSigmaDeg is the 1-sigma from the Fisher information with the
	// measured residual noise (REFERENCES §6).
	FisherSigmaDeg float64
	// BootstrapSigmaDeg is the RMS spread of residual-bootstrap refits,
	// 0 when the bootstrap was not run.
	BootstrapSigmaDeg float64
	// CorrelatedSigmaDeg is the 1-sigma that allows for residuals correlated
	// with heading (see correlatedSigma); SigmaDeg is never below it.
	CorrelatedSigmaDeg float64
	// Warnings lists conditions that make the bearing less trustworthy.
	Warnings []string
}

// Errors returned (wrapped) by Fit; test with errors.Is.
var (
	ErrTooFewPoints = errors.New("too few usable level readings")
	ErrCoverage     = errors.New("sweep covers too little of the circle")
	ErrNoVariation  = errors.New("no level variation above the noise")
	ErrNoOverlap    = errors.New("the sweep never came near the pattern's null or peak")
	ErrBadInput     = errors.New("bad input")
)

func (o FitOptions) withDefaults() (FitOptions, error) {
	if o.BinDeg == 0 {
		o.BinDeg = 1
	}
	if !(o.BinDeg >= 0.1 && o.BinDeg <= 10) {
		return o, fmt.Errorf("%w: bin width %g° out of range [0.1, 10]", ErrBadInput, o.BinDeg)
	}
	if o.MinPoints == 0 {
		o.MinPoints = 20
	}
	if o.MinPoints < 5 {
		o.MinPoints = 5
	}
	if o.MinCoverageDeg == 0 {
		o.MinCoverageDeg = 90
	}
	if o.MaxGapDeg == 0 {
		o.MaxGapDeg = 10
	}
	if o.Bootstrap == 0 {
		o.Bootstrap = 100
	}
	if o.NoiseFloorDB != nil && (math.IsNaN(*o.NoiseFloorDB) || math.IsInf(*o.NoiseFloorDB, 0)) {
		return o, fmt.Errorf("%w: noise floor is not finite", ErrBadInput)
	}
	switch o.Noise {
	case NoiseAuto:
		if o.NoiseFloorDB != nil {
			o.Noise = NoiseThermal
		} else {
			o.Noise = NoiseDB
		}
	case NoiseDB:
	case NoiseThermal:
		if o.NoiseFloorDB == nil {
			return o, fmt.Errorf("%w: the thermal noise model needs the noise floor (FitOptions.NoiseFloorDB)", ErrBadInput)
		}
	default:
		return o, fmt.Errorf("%w: unknown noise model %d", ErrBadInput, int(o.Noise))
	}
	return o, nil
}

// bins holds readings grouped by heading.
type bins struct {
	hDeg []float64 // circular mean heading of the bin
	yDB  []float64 // mean level, dB
	pw   []float64 // mean power relative to the noise floor (thermal) or 10^(dB/10)
	n    []float64 // readings in the bin
}

func makeBins(pts []Point, binDeg float64, floorDB float64) bins {
	nb := int(math.Ceil(360/binDeg - 1e-9))
	sx := make([]float64, nb)
	sy := make([]float64, nb)
	sdb := make([]float64, nb)
	spw := make([]float64, nb)
	cnt := make([]float64, nb)
	for _, p := range pts {
		h := angle.Wrap360(p.HeadingDeg)
		i := int(h / binDeg)
		if i >= nb {
			i = nb - 1
		}
		s, c := math.Sincos(h * math.Pi / 180)
		sx[i] += s
		sy[i] += c
		sdb[i] += p.LevelDB
		spw[i] += math.Pow(10, (p.LevelDB-floorDB)/10)
		cnt[i]++
	}
	var b bins
	for i := range cnt {
		if cnt[i] == 0 {
			continue
		}
		b.hDeg = append(b.hDeg, angle.Wrap360(math.Atan2(sx[i], sy[i])*180/math.Pi))
		b.yDB = append(b.yDB, sdb[i]/cnt[i])
		b.pw = append(b.pw, spw[i]/cnt[i])
		b.n = append(b.n, cnt[i])
	}
	return b
}

// coverage returns the covered degrees and the uncovered gaps (start, width)
// wider than maxGap.
func coverage(pts []Point, maxGap float64) (float64, [][2]float64) {
	h := make([]float64, len(pts))
	for i, p := range pts {
		h[i] = angle.Wrap360(p.HeadingDeg)
	}
	sort.Float64s(h)
	var gaps [][2]float64
	cov := 360.0
	for i := range h {
		var g float64
		if i+1 < len(h) {
			g = h[i+1] - h[i]
		} else {
			g = h[0] + 360 - h[i]
		}
		if g > maxGap {
			gaps = append(gaps, [2]float64{h[i], g})
			cov -= g
		}
	}
	return cov, gaps
}

// inGap reports whether heading x lies strictly inside one of the gaps.
func inGap(x float64, gaps [][2]float64) bool {
	for _, g := range gaps {
		d := angle.Wrap360(x - g[0])
		if d > 0 && d < g[1] {
			return true
		}
	}
	return false
}

// solver fits one data vector (bin values) for a fixed bin geometry.
type solver struct {
	m      *model
	b      bins
	noise  NoiseModel
	floor  float64 // linear noise power (1 in thermal, by normalisation)
	mu     []float64
	dmu    []float64
	dlin   []float64
	pwk    []float64
	w      []float64
	resid  []float64
	ptsSym int
}

func newSolver(m *model, b bins, noise NoiseModel) *solver {
	n := len(b.hDeg)
	return &solver{m: m, b: b, noise: noise, floor: 1,
		mu: make([]float64, n), dmu: make([]float64, n), dlin: make([]float64, n),
		pwk: make([]float64, n), w: make([]float64, n), resid: make([]float64, n)}
}

// eval fills mu, dmu (dμ/dθ), dlin (dμ/dc or dμ/dS), w and resid for data y
// at (theta, c). In NoiseDB, c is the level offset in dB; in NoiseThermal, c
// is the signal power S relative to the noise floor.
func (s *solver) eval(y []float64, theta, c float64, reweight bool) float64 {
	var sse float64
	for k, h := range s.b.hDeg {
		x := theta - h
		if s.noise == NoiseDB {
			g, sl := s.m.gainSlopeDB(x)
			s.mu[k] = c + g
			s.dmu[k] = sl
			s.dlin[k] = 1
			if reweight {
				s.w[k] = s.b.n[k]
			}
		} else {
			pw, d := s.m.power(x)
			s.pwk[k] = pw
			s.mu[k] = c*pw + s.floor
			s.dmu[k] = c * d
			s.dlin[k] = pw
			if reweight {
				sp := math.Max(c, 0) * pw
				s.w[k] = s.b.n[k] / (s.floor*s.floor + 2*sp*s.floor)
			}
		}
		r := y[k] - s.mu[k]
		s.resid[k] = r
		sse += s.w[k] * r * r
	}
	return sse
}

// normal returns the 2×2 normal matrix JᵀWJ and JᵀWr at the last eval.
func (s *solver) normal() (a11, a12, a22, b1, b2 float64) {
	for k := range s.mu {
		w := s.w[k]
		a11 += w * s.dmu[k] * s.dmu[k]
		a12 += w * s.dmu[k] * s.dlin[k]
		a22 += w * s.dlin[k] * s.dlin[k]
		b1 += w * s.dmu[k] * s.resid[k]
		b2 += w * s.dlin[k] * s.resid[k]
	}
	return
}

// linearStart returns the closed-form level parameter at theta.
func (s *solver) linearStart(y []float64, theta float64) float64 {
	var num, den float64
	for k, h := range s.b.hDeg {
		if s.noise == NoiseDB {
			g := s.m.gainDB(theta - h)
			num += s.b.n[k] * (y[k] - g)
			den += s.b.n[k]
		} else {
			pw, _ := s.m.power(theta - h)
			num += s.b.n[k] * pw * (y[k] - s.floor)
			den += s.b.n[k] * pw * pw
		}
	}
	if den == 0 {
		return 0
	}
	return num / den
}

// gaussNewton refines (theta, c) from theta0 and returns them with the final
// weighted SSE.
func (s *solver) gaussNewton(y []float64, theta0 float64) (theta, c, sse float64) {
	theta = theta0
	c = s.linearStart(y, theta)
	if s.noise == NoiseThermal && c <= 0 {
		c = 1e-6
	}
	for it := 0; it < 60; it++ {
		sse = s.eval(y, theta, c, true)
		a11, a12, a22, b1, b2 := s.normal()
		det := a11*a22 - a12*a12
		if !(det > 0) {
			break
		}
		dt := (a22*b1 - a12*b2) / det
		dc := (a11*b2 - a12*b1) / det
		if math.Abs(dt) > 5 {
			f := 5 / math.Abs(dt)
			dt *= f
			dc *= f
		}
		// Step halving on the SSE with this iteration's weights.
		step := 1.0
		accepted := false
		for tries := 0; tries < 30; tries++ {
			nt, nc := theta+step*dt, c+step*dc
			if s.noise == NoiseThermal && nc <= 0 {
				nc = c / 2
			}
			if s.eval(y, nt, nc, false) <= sse*(1+1e-12) {
				theta, c = nt, nc
				accepted = true
				break
			}
			step /= 2
		}
		if !accepted || math.Abs(step*dt) < 1e-7 {
			break
		}
	}
	sse = s.eval(y, theta, c, true)
	return angle.Wrap360(theta), c, sse
}

// coarse returns up to three candidate rotations (degrees) from the circular
// cross-correlation of the binned dB levels with the pattern (via FFT),
// refined by a parabola through the profile SSE around each minimum.
func coarse(p Pattern, pts []Point) []float64 {
	const n = PatternSteps
	d := make([]float64, n)
	m := make([]float64, n)
	cnt := make([]float64, n)
	for _, q := range pts {
		i := int(angle.Wrap360(q.HeadingDeg)) % n
		d[i] += q.LevelDB
		cnt[i]++
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for i := range d {
		if cnt[i] > 0 {
			d[i] /= cnt[i]
			m[i] = 1
			lo = math.Min(lo, d[i])
			hi = math.Max(hi, d[i])
		}
	}
	span := math.Max(hi-lo, 1)
	g := make([]float64, n)
	g2 := make([]float64, n)
	for k := range g {
		g[k] = math.Max(p.GainDB[k], -span)
		g2[k] = g[k] * g[k]
	}
	md := make([]float64, n)
	var nn, d1, d2 float64
	for i := range d {
		md[i] = m[i] * d[i]
		nn += m[i]
		d1 += md[i]
		d2 += md[i] * d[i]
	}
	fft := fourier.NewFFT(n)
	conv := func(a, b []float64) []float64 {
		fa := fft.Coefficients(nil, a)
		fb := fft.Coefficients(nil, b)
		for i := range fa {
			fa[i] *= fb[i]
		}
		out := fft.Sequence(nil, fa)
		for i := range out {
			out[i] /= n
		}
		return out
	}
	// (x*G)(θ) = Σ_j x_j G(θ−j): circular convolution.
	A := conv(m, g)
	B := conv(m, g2)
	C := conv(md, g)
	sse := make([]float64, n)
	for t := range sse {
		sse[t] = d2 - 2*C[t] + B[t] - (d1-A[t])*(d1-A[t])/nn
	}
	type cand struct{ t, v float64 }
	var cs []cand
	for t := 0; t < n; t++ {
		l, r := sse[(t+n-1)%n], sse[(t+1)%n]
		if sse[t] <= l && sse[t] < r {
			off := 0.0
			den := l - 2*sse[t] + r
			if den > 0 {
				off = 0.5 * (l - r) / den
			}
			cs = append(cs, cand{float64(t) + off, sse[t]})
		}
	}
	sort.Slice(cs, func(i, j int) bool { return cs[i].v < cs[j].v })
	var out []float64
	for _, c := range cs {
		if len(out) == 3 {
			break
		}
		out = append(out, angle.Wrap360(c.t))
	}
	if len(out) == 0 {
		out = append(out, 0)
	}
	return out
}

// Fit finds the bearing that best explains the levels seen at each heading
// with pattern p: coarse circular cross-correlation by FFT, then Gauss–Newton
// in (θ, level) under the chosen noise model, then the Fisher-information
// sigma with the measured residual noise and a residual bootstrap.
//
// It refuses (returns an error wrapping ErrTooFewPoints, ErrCoverage,
// ErrNoVariation, ErrNoOverlap or ErrBadInput) instead of making up a bearing.
// Points with non-finite fields are bad input.
func Fit(points []Point, p Pattern, opts FitOptions) (Estimate, error) {
	if err := p.Validate(); err != nil {
		return Estimate{}, fmt.Errorf("fit bearing: %w: %w", ErrBadInput, err)
	}
	o, err := opts.withDefaults()
	if err != nil {
		return Estimate{}, fmt.Errorf("fit bearing: %w", err)
	}
	pts := make([]Point, 0, len(points))
	clipped := 0
	for i, q := range points {
		if math.IsNaN(q.HeadingDeg) || math.IsInf(q.HeadingDeg, 0) || math.IsNaN(q.LevelDB) || math.IsInf(q.LevelDB, 0) || math.IsNaN(q.T) || math.IsInf(q.T, 0) {
			return Estimate{}, fmt.Errorf("fit bearing: %w: point %d has a non-finite field", ErrBadInput, i)
		}
		if q.Clipped {
			clipped++
			continue
		}
		pts = append(pts, q)
	}
	if len(pts) < o.MinPoints {
		return Estimate{}, fmt.Errorf("fit bearing: %w: %d usable of %d (need %d)", ErrTooFewPoints, len(pts), len(points), o.MinPoints)
	}
	cov, gaps := coverage(pts, o.MaxGapDeg)
	if cov < o.MinCoverageDeg {
		return Estimate{}, fmt.Errorf("fit bearing: %w: %.0f° covered, need %.0f°; turn the antenna further", ErrCoverage, cov, o.MinCoverageDeg)
	}
	floorDB := 0.0
	if o.NoiseFloorDB != nil {
		floorDB = *o.NoiseFloorDB
	}
	b := makeBins(pts, o.BinDeg, floorDB)
	if len(b.hDeg) < 5 {
		return Estimate{}, fmt.Errorf("fit bearing: %w: only %d distinct headings", ErrTooFewPoints, len(b.hDeg))
	}
	m := newModel(p)
	s := newSolver(m, b, o.Noise)
	y := b.yDB
	if o.Noise == NoiseThermal {
		y = b.pw
	}

	// Coarse candidates, then Gauss–Newton from each; keep the best.
	bestSSE := math.Inf(1)
	var theta, c float64
	for _, t0 := range coarse(p, pts) {
		t, cc, sse := s.gaussNewton(y, t0)
		if sse < bestSSE {
			bestSSE, theta, c = sse, t, cc
		}
	}
	sse := s.eval(y, theta, c, true)
	nb := float64(len(b.hDeg))
	dof := nb - 2
	if dof < 1 {
		return Estimate{}, fmt.Errorf("fit bearing: %w: %d bins", ErrTooFewPoints, len(b.hDeg))
	}
	s2 := sse / dof
	a11, a12, a22, _, _ := s.normal()
	det := a11*a22 - a12*a12

	// Significance of the pattern against a constant level (same weights).
	var sw, swy float64
	for k := range y {
		sw += s.w[k]
		swy += s.w[k] * y[k]
	}
	var sse0 float64
	for k := range y {
		r := y[k] - swy/sw
		sse0 += s.w[k] * r * r
	}
	fstat := (sse0 - sse) / math.Max(s2, 1e-300)
	if (o.Noise == NoiseThermal && c <= 0) || !(fstat > 30) || !(det > 0) {
		return Estimate{}, fmt.Errorf("fit bearing: %w: F = %.1f against a constant level (need 30)", ErrNoVariation, fstat)
	}
	fisherSigma := math.Sqrt(s2 * a22 / det)
	hacSigma := correlatedSigma(s, a11, a12, a22, cov >= 359)

	est := Estimate{
		BearingDeg:         theta,
		FisherSigmaDeg:     fisherSigma,
		SigmaDeg:           math.Max(fisherSigma, hacSigma),
		CorrelatedSigmaDeg: hacSigma,
		CoverageDeg:        cov,
		Points:             len(pts),
		Mode:               p.Mode,
		Noise:              o.Noise,
	}
	if o.Noise == NoiseDB {
		est.LevelDB = c
	} else {
		est.LevelDB = floorDB + 10*math.Log10(c)
		est.NoiseFloorDB = floorDB
	}
	period := 360 / float64(p.Symmetry)
	if p.Symmetry > 1 {
		alt := angle.Wrap360(theta + period)
		est.AltBearingDeg = &alt
		if p.Symmetry > 2 {
			est.Warnings = append(est.Warnings, fmt.Sprintf("pattern has a %d-fold ambiguity: bearings every %.0f° fit equally", p.Symmetry, period))
		}
	}

	// Residual in dB and the per-bin dB fit.
	muDB := make([]float64, len(b.hDeg))
	var rr, nn float64
	for k := range b.hDeg {
		if o.Noise == NoiseDB {
			muDB[k] = s.mu[k]
		} else {
			muDB[k] = floorDB + 10*math.Log10(s.mu[k])
		}
		r := b.yDB[k] - muDB[k]
		rr += b.n[k] * r * r
		nn += b.n[k]
	}
	est.ResidualDB = math.Sqrt(rr / nn)

	// The feature's heading(s): level = c + G(θ − φ), feature at G(f) → φ = θ − f.
	f := p.FeatureDeg()
	halfW := math.Max(p.WidthDeg()/2, 5)
	near := false
	for k := 0; k < p.Symmetry; k++ {
		fh := angle.Wrap360(theta - f + float64(k)*period)
		for _, h := range b.hDeg {
			if math.Abs(angle.Wrap180(h-fh)) <= halfW {
				near = true
			}
		}
	}
	if !near {
		return Estimate{}, fmt.Errorf("fit bearing: %w (fitted %.1f°, no reading within %.0f° of the feature)", ErrNoOverlap, theta, halfW)
	}

	// Null depth / span on smoothed binned levels.
	sm := smoothGrid(pts)
	est.NullDepthDB = depth(sm, p, theta)

	// Warnings.
	if clipped > 0 {
		est.Warnings = append(est.Warnings, fmt.Sprintf("clipping: %d of %d readings clipped and left out", clipped, len(points)))
	}
	if p.Mode == Null && cov < 300 {
		est.Warnings = append(est.Warnings, fmt.Sprintf("partial sweep: %.0f° of 360° covered", cov))
	}
	if p.Mode == Peak {
		fh := angle.Wrap360(theta - f)
		w := p.WidthDeg() / 2
		for d := -w; d <= w; d += 0.5 {
			if inGap(fh+d, gaps) {
				est.Warnings = append(est.Warnings, fmt.Sprintf("partial sweep: main lobe (±%.0f° around %.0f°) not fully covered", w, fh))
				break
			}
		}
	}
	if hacSigma > 1.5*fisherSigma {
		est.Warnings = append(est.Warnings, fmt.Sprintf("multipath-like residuals: sigma %.2f° widened to %.2f°", fisherSigma, hacSigma))
	}
	if w := trendWarning(pts, m, o.Noise, theta, c, floorDB, s2); w != "" {
		est.Warnings = append(est.Warnings, w)
	}
	if w := multipathWarning(sm, m, p, theta, c, o.Noise, floorDB); w != "" {
		est.Warnings = append(est.Warnings, w)
	}

	// Residual bootstrap.
	if o.Bootstrap > 0 {
		est.BootstrapSigmaDeg = bootstrap(s, y, theta, c, o.Bootstrap, o.Seed, period)
		bs, fs := est.BootstrapSigmaDeg, est.FisherSigmaDeg
		if bs > 2*fs || fs > 2*bs {
			est.Warnings = append(est.Warnings, fmt.Sprintf("uncertainty: bootstrap %.2f° and Fisher %.2f° disagree; reporting the larger", bs, fs))
			est.SigmaDeg = math.Max(est.SigmaDeg, bs)
		}
	}
	return est, nil
}

// FittedLevelDB returns the level the fit predicts at headingDeg with
// pattern p (the pattern the estimate was fitted with): LevelDB + G(θ − φ)
// for NoiseDB, 10·log10(carrier·p + noise) for NoiseThermal.
func (e Estimate) FittedLevelDB(p Pattern, headingDeg float64) float64 {
	if p.Validate() != nil {
		return math.NaN()
	}
	m := newModel(p)
	if e.Noise == NoiseThermal {
		return levelAt(m, NoiseThermal, e.BearingDeg, math.Pow(10, (e.LevelDB-e.NoiseFloorDB)/10), e.NoiseFloorDB, headingDeg)
	}
	return levelAt(m, NoiseDB, e.BearingDeg, e.LevelDB, 0, headingDeg)
}

// correlatedSigma is the bearing's 1-sigma from a sandwich (Newey–West,
// Bartlett weights) estimate of the variance of the efficient score for θ
// (c profiled out), over bins ordered by heading (circularly when the sweep
// closes the circle), with a bandwidth of a quarter of the bins. Residuals
// that repeat with heading — site multipath, a pattern that does not quite
// fit — are correlated from bin to bin; the Fisher information counts every
// bin as independent and so understates the error, this does not. For
// independent residuals it agrees with the Fisher sigma on average
// (Newey & West, Econometrica 55(3), 1987; the HAC estimator is common
// practice in regression with serially correlated errors).
func correlatedSigma(s *solver, a11, a12, a22 float64, circular bool) float64 {
	n := len(s.resid)
	if n < 4 || !(a22 > 0) {
		return 0
	}
	ieff := a11 - a12*a12/a22
	if !(ieff > 0) {
		return 0
	}
	g := make([]float64, n)
	for k := range g {
		g[k] = s.w[k] * s.resid[k] * (s.dmu[k] - a12/a22*s.dlin[k])
	}
	L := max(1, n/4)
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

// bootstrap refits resampled standardised residuals and returns the RMS
// spread of the refitted bearings (modulo the pattern's period).
func bootstrap(s *solver, y []float64, theta, c float64, nboot int, seed uint64, period float64) float64 {
	s.eval(y, theta, c, true)
	n := len(y)
	mu := append([]float64(nil), s.mu...)
	sw := make([]float64, n)
	e := make([]float64, n)
	var mean float64
	infl := math.Sqrt(float64(n) / float64(n-2))
	for k := range y {
		sw[k] = math.Sqrt(s.w[k])
		e[k] = s.resid[k] * sw[k] * infl
		mean += e[k]
	}
	mean /= float64(n)
	for k := range e {
		e[k] -= mean
	}
	rng := rand.New(rand.NewPCG(seed, 0x6e756c6c7365656b))
	ys := make([]float64, n)
	var acc float64
	for i := 0; i < nboot; i++ {
		for k := range ys {
			ys[k] = mu[k] + e[rng.IntN(n)]/sw[k]
		}
		t, _, _ := s.gaussNewton(ys, theta)
		d := math.Mod(angle.Wrap180(t-theta)+period/2+360*4, period) - period/2
		acc += d * d
	}
	return math.Sqrt(acc / float64(nboot))
}

// smoothGrid returns mean dB per 1° heading (NaN where empty), smoothed by a
// 5° circular moving average over occupied cells.
func smoothGrid(pts []Point) []float64 {
	const n = PatternSteps
	sum := make([]float64, n)
	cnt := make([]float64, n)
	for _, q := range pts {
		i := int(angle.Wrap360(q.HeadingDeg)) % n
		sum[i] += q.LevelDB
		cnt[i]++
	}
	out := make([]float64, n)
	for i := range out {
		if cnt[i] == 0 {
			out[i] = math.NaN()
			continue
		}
		var s, c float64
		for d := -2; d <= 2; d++ {
			j := (i + d + n) % n
			if cnt[j] > 0 {
				s += sum[j] / cnt[j]
				c++
			}
		}
		out[i] = s / c
	}
	return out
}

func depth(sm []float64, p Pattern, theta float64) float64 {
	hi, lo := math.Inf(-1), math.Inf(1)
	for _, v := range sm {
		if !math.IsNaN(v) {
			hi = math.Max(hi, v)
			lo = math.Min(lo, v)
		}
	}
	if p.Mode == Peak {
		return hi - lo
	}
	period := 360 / float64(p.Symmetry)
	f := p.FeatureDeg()
	at := math.Inf(1)
	for k := 0; k < p.Symmetry; k++ {
		fh := angle.Wrap360(theta - f + float64(k)*period)
		for d := -2; d <= 2; d++ {
			v := sm[(int(math.Round(fh))+d+2*PatternSteps)%PatternSteps]
			if !math.IsNaN(v) {
				at = math.Min(at, v)
			}
		}
	}
	if math.IsInf(at, 1) {
		return math.NaN()
	}
	return hi - at
}

// levelAt returns the fitted level in dB at heading h.
func levelAt(m *model, noise NoiseModel, theta, c, floorDB, h float64) float64 {
	if noise == NoiseDB {
		return c + m.gainDB(theta-h)
	}
	pw, _ := m.power(theta - h)
	return floorDB + 10*math.Log10(c*pw+1)
}

// trendWarning regresses the dB residual on time and warns when the level
// drifted by more than 1 dB over the sweep at more than 4 standard errors.
func trendWarning(pts []Point, m *model, noise NoiseModel, theta, c, floorDB, s2 float64) string {
	// residual in dB and its weight: in the thermal model the dB variance
	// is ∝ (N² + 2SpN)/(Sp+N)² (delta method)
	resid := func(q Point) (r, w float64) {
		r = q.LevelDB - levelAt(m, noise, theta, c, floorDB, q.HeadingDeg)
		w = 1
		if noise == NoiseThermal {
			pw, _ := m.power(theta - q.HeadingDeg)
			sp := c * pw
			w = (sp + 1) * (sp + 1) / (1 + 2*sp)
		}
		return r, w
	}
	var sw, st, sr, stt, str float64
	t0, t1 := math.Inf(1), math.Inf(-1)
	for _, q := range pts {
		r, w := resid(q)
		sw += w
		st += w * q.T
		sr += w * r
		stt += w * q.T * q.T
		str += w * q.T * r
		t0 = math.Min(t0, q.T)
		t1 = math.Max(t1, q.T)
	}
	varT := stt - st*st/sw
	if !(varT > 0) || !(t1 > t0) {
		return ""
	}
	slope := (str - st*sr/sw) / varT
	// residual variance around the trend
	var rss float64
	mt, mr := st/sw, sr/sw
	for _, q := range pts {
		r, w := resid(q)
		e := r - mr - slope*(q.T-mt)
		rss += w * e * e
	}
	se := math.Sqrt(rss / float64(len(pts)-2) / varT)
	change := slope * (t1 - t0)
	if math.Abs(change) > 1 && math.Abs(slope) > 4*se {
		return fmt.Sprintf("level trend: %+.1f dB over the %.0f s sweep (transmitter or path changed while turning)", change, t1-t0)
	}
	return ""
}

// extrema finds local extrema (minima if wantMin) of a circular grid with
// NaN gaps, with their prominence over a ±30° window.
func extrema(v []float64, wantMin bool) (idx []int, prom []float64) {
	n := len(v)
	sgn := 1.0
	if !wantMin {
		sgn = -1
	}
	for i := range v {
		if math.IsNaN(v[i]) {
			continue
		}
		x := sgn * v[i]
		isExt := true
		for d := -3; d <= 3 && isExt; d++ {
			if d == 0 {
				continue
			}
			u := v[(i+d+n)%n]
			if !math.IsNaN(u) && (sgn*u < x || (sgn*u == x && d < 0)) {
				isExt = false
			}
		}
		if !isExt {
			continue
		}
		side := func(dir int) float64 {
			mx := x
			for d := 1; d <= 30; d++ {
				u := v[(i+dir*d+n)%n]
				if !math.IsNaN(u) {
					mx = math.Max(mx, sgn*u)
				}
			}
			return mx - x
		}
		idx = append(idx, i)
		prom = append(prom, math.Min(side(1), side(-1)))
	}
	return idx, prom
}

// multipathWarning looks for a second null (peak) in the smoothed data of
// comparable prominence that the fitted pattern does not explain.
func multipathWarning(sm []float64, m *model, p Pattern, theta, c float64, noise NoiseModel, floorDB float64) string {
	wantMin := p.Mode == Null
	di, dp := extrema(sm, wantMin)
	fit := make([]float64, len(sm))
	for i := range fit {
		if math.IsNaN(sm[i]) {
			fit[i] = math.NaN()
		} else {
			fit[i] = levelAt(m, noise, theta, c, floorDB, float64(i))
		}
	}
	mi, mp := extrema(fit, wantMin)
	var main float64
	period := 360 / float64(p.Symmetry)
	f := p.FeatureDeg()
	for k, i := range di {
		for s := 0; s < p.Symmetry; s++ {
			if math.Abs(angle.Wrap180(float64(i)-(theta-f+float64(s)*period))) <= 10 {
				main = math.Max(main, dp[k])
			}
		}
	}
	for k, i := range di {
		if dp[k] < 3 || dp[k] < 0.5*main {
			continue
		}
		explained := false
		for j, mIdx := range mi {
			if mp[j] >= 1 && math.Abs(angle.Wrap180(float64(i-mIdx))) <= 15 {
				explained = true
			}
		}
		if !explained {
			what := "null"
			if !wantMin {
				what = "peak"
			}
			return fmt.Sprintf("multipath: a second %s at heading %.0f° (%.1f dB) that the pattern does not explain", what, float64(i), dp[k])
		}
	}
	return ""
}
