package bearing

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"nullseek/internal/angle"

	"gonum.org/v1/gonum/stat/distuv"
)

// Point is one level reading taken while the antenna turned.
type Point struct {
	// T is the reading's time in seconds (any origin; used for the fading
	// model, the trend and the lag).
	T float64
	// HeadingDeg is the antenna's heading, degrees clockwise: the
	// direction of its pattern's reference (Pattern.HeadingRef says which).
	HeadingDeg float64
	// LevelDB is the received level in dB (any fixed reference, e.g. dBFS).
	LevelDB float64
	// Clipped marks a reading taken while the receiver's ADC was at its
	// rails: its level is too low by an unknown amount. The fit uses it as
	// a lower bound (Usage.Clipped).
	Clipped bool
	// KeyUp marks a reading taken while a keyed carrier was off (a gap
	// between Morse elements): left out of the fit (Usage.KeyUp).
	KeyUp bool
}

// NoiseModel selects how the level readings' errors are modelled.
type NoiseModel int

const (
	// NoiseAuto uses NoiseThermal when FitOptions.NoiseFloorDB is set and
	// NoiseDB otherwise.
	NoiseAuto NoiseModel = iota
	// NoiseDB: level = c + G(θ−φ) + e with e ~ N(0, σ²) in dB, σ constant and
	// estimated from the residuals: the model of the Cramér–Rao bound CRBDBDeg.
	NoiseDB
	// NoiseThermal: each reading is a power averaged over many samples of a
	// carrier plus complex Gaussian noise of known power N (the noise
	// floor): E[P] = S·p(θ−φ) + N, Var[P] ∝ N² + 2·S·p·N. A null filled by
	// noise is modelled instead of being mistaken for the pattern's null.
	// The variance scale (1/samples per reading) is estimated.
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

// FitOptions tunes Fit. The zero value gives the defaults (DefaultFit).
type FitOptions struct {
	// BinDeg is the heading step of a cell in degrees: consecutive
	// readings within it are averaged (default 1; range 0.1..10).
	BinDeg float64
	// NoiseFloorDB, when set, is the level of the noise alone on the LevelDB
	// scale (from the receiver's noise estimate); it enables NoiseThermal.
	NoiseFloorDB *float64
	// Noise selects the error model (default NoiseAuto).
	Noise NoiseModel
	// MinPoints is the fewest usable readings accepted (default 20; range
	// 5..10⁷).
	MinPoints int
	// MinCoverageDeg is the least sweep coverage accepted (default 90°;
	// range 10..360).
	MinCoverageDeg float64
	// MaxGapDeg: gaps between neighbouring headings no wider than this count
	// as covered (default 10°; range 0.5..90).
	MaxGapDeg float64
	// Bootstrap is the number of residual-bootstrap refits (0 → 100,
	// negative → no bootstrap; at most 10000). It runs only when the
	// residuals show no fading (the bootstrap assumes independent cells).
	Bootstrap int
	// Seed seeds the bootstrap's random numbers (runs are reproducible).
	Seed uint64
}

// DefaultFit holds the defaults of FitOptions (the zero value means them).
var DefaultFit = FitOptions{BinDeg: 1, MinPoints: 20, MinCoverageDeg: 90, MaxGapDeg: 10, Bootstrap: 100}

// Validate checks every field against its documented range; a zero field
// means its default and is valid.
func (o FitOptions) Validate() error {
	_, err := o.withDefaults()
	return err
}

// Flag names a condition that makes a bearing less trustworthy; each flag
// comes with a sentence in Estimate.Warnings.
type Flag string

// FlagNames returns the flags as strings, in order (nil for none), as the
// outputs list them.
func FlagNames(fs []Flag) []string {
	if len(fs) == 0 {
		return nil
	}
	names := make([]string, len(fs))
	for i, f := range fs {
		names[i] = string(f)
	}
	return names
}

const (
	// FlagPartial: the sweep covered the pattern's feature but not the
	// whole circle.
	FlagPartial Flag = "partial"
	// FlagFading: the level changed with time in a way that does not repeat
	// with heading (fading, a transmitter whose power wanders); the fit
	// modelled it and the sigma allows for it.
	FlagFading Flag = "fading"
	// FlagMultipath: the level changed with heading in a way the pattern does
	// not explain (a second path, a site that distorts the pattern).
	FlagMultipath Flag = "multipath"
	// FlagClipping: some readings were taken at the ADC's rails.
	FlagClipping Flag = "clipping"
	// FlagTrend: the level drifted steadily during the sweep.
	FlagTrend Flag = "trend"
	// FlagAmbiguous: the pattern fits equally at more than two bearings.
	FlagAmbiguous Flag = "ambiguous"
	// FlagUncertain: two estimates of the uncertainty disagree.
	FlagUncertain Flag = "uncertain"
)

// Estimate is a fitted bearing.
type Estimate struct {
	// BearingDeg is the transmitter's bearing, degrees clockwise in [0, 360),
	// in the heading source's reference (true north if the headings are true).
	BearingDeg float64
	// SigmaDeg is the reported 1-sigma uncertainty: the largest of
	// ModelSigmaDeg, CorrelatedSigmaDeg and (when it disagrees with the
	// Fisher sigma by more than twice) BootstrapSigmaDeg.
	SigmaDeg float64
	// AltBearingDeg is the equally good alternative bearing of an ambiguous
	// pattern (BearingDeg + 360°/Symmetry), nil for an unambiguous one.
	AltBearingDeg *float64
	// NullDepthDB: for a Null pattern, the highest smoothed level minus the
	// level measured nearest the fitted null; for a Peak pattern, the span
	// between the highest and lowest smoothed levels. Always finite.
	NullDepthDB float64
	// ResidualDB is the RMS of cell level minus fitted level over the cells
	// used, dB (fading included).
	ResidualDB float64
	// CoverageDeg is the part of the circle the headings covered, degrees;
	// Arcs are the covered stretches.
	CoverageDeg float64
	Arcs        []Arc
	// Points is the number of readings used (Usage.Used).
	Points int
	// Usage says which readings were used and which left out.
	Usage Usage
	// Mode is the pattern's mode (which feature marked the bearing).
	Mode Mode
	// Noise is the error model that was used.
	Noise NoiseModel
	// LevelDB is the fitted carrier level at the pattern's 0 dB direction
	// (without the noise), on the LevelDB scale (its mean over the sweep
	// when the level faded).
	LevelDB float64
	// NoiseFloorDB is the noise floor the thermal model used (0 for NoiseDB).
	NoiseFloorDB float64
	// FisherSigmaDeg is the 1-sigma from the Fisher information of
	// independent cells with the measured residual noise.
	FisherSigmaDeg float64
	// ModelSigmaDeg is the 1-sigma from the Fisher information of the
	// model that was fitted: FisherSigmaDeg, or with fading the generalised
	// least-squares information under the fitted fading.
	ModelSigmaDeg float64
	// BootstrapSigmaDeg is the RMS spread of residual-bootstrap refits,
	// 0 when the bootstrap was not run.
	BootstrapSigmaDeg float64
	// CorrelatedSigmaDeg is the 1-sigma that allows for residuals correlated
	// with heading (see hacSigma); SigmaDeg is never below it.
	CorrelatedSigmaDeg float64
	// FadingDB and FadingTimeS describe the fading the fit found: the RMS
	// of the level changes that do not repeat with heading (dB) and their
	// correlation time (s); both 0 when none was found.
	FadingDB, FadingTimeS float64
	// Flags name the conditions that make the bearing less trustworthy;
	// Warnings say each in a sentence (and may say more).
	Flags    []Flag
	Warnings []string
}

// HasFlag reports whether the estimate carries flag f.
func (e Estimate) HasFlag(f Flag) bool {
	for _, g := range e.Flags {
		if g == f {
			return true
		}
	}
	return false
}

func (e *Estimate) warn(f Flag, format string, args ...any) {
	if !e.HasFlag(f) {
		e.Flags = append(e.Flags, f)
	}
	e.Warnings = append(e.Warnings, fmt.Sprintf(format, args...))
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
	d := DefaultFit
	if o.BinDeg == 0 {
		o.BinDeg = d.BinDeg
	}
	if !(o.BinDeg >= 0.1 && o.BinDeg <= 10) {
		return o, fmt.Errorf("%w: bin width %g° out of range [0.1, 10]", ErrBadInput, o.BinDeg)
	}
	if o.MinPoints == 0 {
		o.MinPoints = d.MinPoints
	}
	if o.MinPoints < 5 || o.MinPoints > 1e7 {
		return o, fmt.Errorf("%w: minimum readings %d out of range [5, 10⁷]", ErrBadInput, o.MinPoints)
	}
	if o.MinCoverageDeg == 0 {
		o.MinCoverageDeg = d.MinCoverageDeg
	}
	if !(o.MinCoverageDeg >= 10 && o.MinCoverageDeg <= 360) {
		return o, fmt.Errorf("%w: minimum coverage %g° out of range [10, 360]", ErrBadInput, o.MinCoverageDeg)
	}
	if o.MaxGapDeg == 0 {
		o.MaxGapDeg = d.MaxGapDeg
	}
	if !(o.MaxGapDeg >= 0.5 && o.MaxGapDeg <= 90) {
		return o, fmt.Errorf("%w: largest covered gap %g° out of range [0.5, 90]", ErrBadInput, o.MaxGapDeg)
	}
	if o.Bootstrap == 0 {
		o.Bootstrap = d.Bootstrap
	}
	if o.Bootstrap > 10000 {
		return o, fmt.Errorf("%w: %d bootstrap refits, at most 10000", ErrBadInput, o.Bootstrap)
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

// fadingLR is the likelihood-ratio statistic (twice the log-likelihood
// gain, two extra parameters) above which the fit models fading: the
// χ²₂ tail beyond it is 2·10⁻⁹ (exp(−40/2)), so noise alone almost never
// turns it on, while a level that wanders by a fraction of a dB over
// hundreds of cells passes it by far.
const fadingLR = 40

// minFadingVar is the least fading variance (dB²) the fit models: level
// changes under 0.5 dB RMS move a bearing less than the heading-ordered
// sandwich sigma already allows for, and a pattern table that is a little
// off (a calibrated one, smoothed) would otherwise be taken for fading.
const minFadingVar = 0.25

// Fit finds the bearing that best explains the levels seen at each heading
// with pattern p.
//
// The readings are screened (key-up and drop-outs left out, clipped ones
// kept as lower bounds; Usage), grouped into cells of consecutive readings
// at nearly the same heading, and fitted in dB: a coarse circular
// cross-correlation by FFT proposes candidates; Gauss–Newton in (θ, level)
// under the chosen noise model, with robust weights that leave out cells
// far from the pattern, refines each. The residuals are then tested for
// fading — level changes correlated in time rather than in heading —
// modelled as a Gauss–Markov process; when the test finds it, the fit is
// redone by generalised least squares under it (fitter.kalman), which
// averages the fading out over several turns and widens the sigma where
// it cannot. The sigma is the largest of that model's Fisher sigma, a
// heading-ordered sandwich sigma (multipath, pattern mismatch) and, without
// fading, a residual bootstrap that disagrees.
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
	thermal := o.Noise == NoiseThermal
	var floorPtr *float64
	floorDB := 0.0
	if thermal {
		floorDB = *o.NoiseFloorDB
		floorPtr = o.NoiseFloorDB
	}
	pts, use, err := screen(points, floorPtr)
	if err != nil {
		return Estimate{}, fmt.Errorf("fit bearing: %w", err)
	}
	if len(pts)-use.Clipped < o.MinPoints {
		return Estimate{}, fmt.Errorf("fit bearing: %w: %s; need %d unclipped", ErrTooFewPoints, use, o.MinPoints)
	}
	cov, gaps := coverage(pts, o.MaxGapDeg)
	if cov < o.MinCoverageDeg {
		return Estimate{}, fmt.Errorf("fit bearing: %w: %.1f° covered (%s), need %.0f°; turn the antenna further", ErrCoverage, cov, FormatArcs(arcs(gaps)), o.MinCoverageDeg)
	}
	cells := makeCells(pts, o.BinDeg, thermal, floorDB)
	var clear []Point
	for _, q := range pts {
		if !q.Clipped {
			clear = append(clear, q)
		}
	}
	nclear := 0
	for _, c := range cells {
		if !c.clipped {
			nclear++
		}
	}
	if nclear < 5 {
		return Estimate{}, fmt.Errorf("fit bearing: %w: only %d cells of distinct headings", ErrTooFewPoints, nclear)
	}
	m := newModel(p)
	f := newFitter(m, cells, thermal, floorDB)

	// Candidates from the coarse search, each refined with every reading
	// of the same weight in dB (varUniform: robust to fading), first on
	// the 75% of cells it fits best (concentration steps of least trimmed
	// squares: Rousseeuw & Van Driessen, Data Mining and Knowledge
	// Discovery 12, 2006), so that a second path's lobe cannot drag the
	// start, then with robust weights; then compared on the level in dB itself, each squared
	// residual capped at (6·s)², s the smallest robust residual scale
	// among them.
	type cand struct {
		theta, c, tau float64
		w             []float64
	}
	var cands []cand
	f.vmode = varUniform
	for _, t0 := range coarse(p, clear) {
		for k := range f.w {
			f.w[k] = 1
		}
		f.tau = 0
		t, cc := f.whiteGN(t0, f.start(t0))
		for step := 0; step < 6; step++ {
			if !f.trim(0.75) {
				break
			}
			t, cc = f.whiteGN(t, cc)
		}
		for round := 0; round < 3; round++ {
			f.estimateScale()
			f.reweight()
			t, cc = f.whiteGN(t, cc)
		}
		f.estimateScale()
		cands = append(cands, cand{t, cc, f.tau, append([]float64(nil), f.w...)})
	}
	var theta, c float64
	scale := math.Inf(1)
	for _, cd := range cands {
		f.tau = cd.tau
		f.eval(cd.theta, cd.c)
		scale = math.Min(scale, f.dbScale())
	}
	bestLoss := math.Inf(1)
	best := 0
	for i, cd := range cands {
		f.tau = cd.tau
		f.eval(cd.theta, cd.c)
		if loss := f.dbLoss(6 * scale); loss < bestLoss {
			bestLoss, best = loss, i
		}
	}
	theta, c = cands[best].theta, cands[best].c
	copy(f.w, cands[best].w)
	f.tau = cands[best].tau
	f.eval(theta, c)
	// Cells the robust fit left out as lying far above the pattern (more
	// than lobeDB) stay out when there are many of them (3% of the cells
	// or more: a second path's lobe, not the odd noisy cell near a null): later noise models (fading
	// above all) must not take the lobe back in.
	const lobeDB = 4 // a second path's lobe stands this far above the pattern at least
	var above int
	for k, cl := range f.cells {
		if !cl.clipped && f.w[k] == 0 && f.r[k] > lobeDB {
			above++
		}
	}
	if float64(above) >= 0.03*float64(nclear) {
		f.wBase = make([]float64, len(f.cells))
		for k, cl := range f.cells {
			f.wBase[k] = 1
			if !cl.clipped && f.w[k] == 0 && f.r[k] > lobeDB {
				f.wBase[k] = 0
			}
		}
	}
	passes := turns(pts)

	// Fading: test the uniform fit's residuals, less what repeats with
	// heading, for it.
	f.rAdj = f.headingStructure(passes)
	// The fading's correlation time must stay short against a pass over
	// the pattern: with one pass a slower change is the pattern itself
	// (heading and time go together), over several its repeating part is
	// taken out above but what is left can still mimic the pattern's
	// broad shape within one pass.
	passS := (pts[len(pts)-1].T - pts[0].T) / math.Max(passes, 1)
	f.maxTauS = passS / 2
	if passes < 1.8 {
		f.maxTauS = passS / 6
	}
	fm, tauF, lr, _ := f.profile()
	fading := lr > fadingLR && fm.Var >= minFadingVar
	if thermal {
		if fading {
			f.vmode = varData
		} else {
			f.vmode = varModel
		}
	}
	f.eval(theta, c)
	f.estimateScale()
	f.reweight()
	theta, c = f.whiteGN(theta, c)
	f.estimateScale()
	f.reweight()
	theta, c = f.whiteGN(theta, c)
	f.estimateScale()

	// White-model statistics: significance against a constant level and
	// the Fisher sigma of independent cells.
	dofCells := 0
	for k, cl := range f.cells {
		if !cl.clipped && f.w[k] > 0 {
			dofCells++
		}
	}
	if dofCells < 5 {
		return Estimate{}, fmt.Errorf("fit bearing: %w: only %d cells fit the pattern", ErrTooFewPoints, dofCells)
	}
	fstat, fneed, wa11, wa12, wa22 := f.significance()
	if !(fstat > fneed) {
		return Estimate{}, fmt.Errorf("fit bearing: %w: the level does not change with heading more than noise does (likelihood ratio %.1f, need %.0f)", ErrNoVariation, fstat, fneed)
	}
	fisher := math.Sqrt(f.tau) * fisherSigma(wa11, wa12, wa22)
	if math.IsInf(fisher, 0) || math.IsNaN(fisher) {
		return Estimate{}, fmt.Errorf("fit bearing: %w: the pattern's slope carries no information at these headings", ErrNoVariation)
	}

	// Under fading, refit by generalised least squares.
	if fading {
		fm, tauF, lr, _ = f.profile()
		whiteTheta, whiteC, whiteTau := theta, c, f.tau
		for round := 0; round < 2; round++ {
			f.fad, f.tau = fm, tauF
			f.eval(theta, c)
			f.reweight()
			theta, c = f.glsGN(theta, c)
			fm, tauF, lr, _ = f.profile()
			if !(lr > fadingLR && fm.Var >= minFadingVar) {
				break
			}
		}
		f.fad, f.tau = fm, tauF
		if !(lr > fadingLR && fm.Var >= minFadingVar) {
			// the refit explained the level changes after all
			fading = false
			f.fad = fadingModel{}
			theta, c, f.tau = whiteTheta, whiteC, whiteTau
		}
	}
	f.eval(theta, c)
	f.kalman(f.fad, f.tau, true)
	a11, a12, a22, _, _ := f.glsNormal()
	modelSigma := fisherSigma(a11, a12, a22)
	if !fading {
		modelSigma = fisher
	}
	// Residuals correlated along the heading, over the turns: a sandwich
	// sigma on the model's (whitened) scores ordered by heading. With one
	// pass over each heading, heading and time order are the same.
	ieff := a11 - a12*a12/a22
	g, hd := f.scores(a11, a12, a22)
	hac := hacSigma(headingOrder(g, hd), ieff, len(g)/4, cov >= 359)
	hacT := hacSigma(g, ieff, len(g)/4, false)
	if math.IsNaN(modelSigma) || math.IsInf(modelSigma, 0) {
		return Estimate{}, fmt.Errorf("fit bearing: %w: the pattern's slope carries no information at these headings", ErrNoVariation)
	}

	// With several passes, the spread of refits that each leave one pass
	// out (fading that the model does not describe shows here).
	jk := 0.0
	if fading {
		jk = f.jackknife(theta, c, int(math.Floor(passes+0.2)), 360/float64(p.Symmetry))
		f.eval(theta, c)
		f.kalman(f.fad, f.tau, true)
	}
	// With one pass, the fading's correlation time was held short so that
	// the fit could not take the pattern for fading; the sigma must still
	// allow for fading as slow as the data would have it (up to a whole
	// pass): the information under that slower model, at the same bearing.
	slow := 0.0
	if fading && passes < 1.8 {
		keep, keepTau, keepMax := f.fad, f.tau, f.maxTauS
		f.maxTauS = passS
		f.eval(theta, c)
		fs, ts, lrs, _ := f.profile()
		if lrs > fadingLR && fs.Var >= minFadingVar && fs.TauS > keep.TauS {
			f.fad, f.tau = fs, ts
			f.eval(theta, c)
			f.kalman(f.fad, f.tau, true)
			b11, b12, b22, _, _ := f.glsNormal()
			slow = fisherSigma(b11, b12, b22)
		}
		f.fad, f.tau, f.maxTauS = keep, keepTau, keepMax
		f.eval(theta, c)
		f.kalman(f.fad, f.tau, true)
	}

	est := Estimate{
		BearingDeg:         theta,
		FisherSigmaDeg:     fisher,
		ModelSigmaDeg:      modelSigma,
		CorrelatedSigmaDeg: hac,
		SigmaDeg:           math.Max(math.Max(modelSigma, hac), math.Max(math.Max(hacT, jk), slow)),
		CoverageDeg:        cov,
		Arcs:               arcs(gaps),
		Mode:               p.Mode,
		Noise:              o.Noise,
		LevelDB:            c,
	}
	if thermal {
		est.NoiseFloorDB = floorDB
	}
	if fading {
		est.FadingDB = math.Sqrt(f.fad.Var)
		est.FadingTimeS = f.fad.TauS
	}
	// Readings used: the screen's, less the robust fit's outliers.
	for k, cl := range f.cells {
		if !cl.clipped && f.w[k] == 0 {
			use.Outliers += int(cl.n)
		}
	}
	use.Used -= use.Outliers
	est.Usage = use
	est.Points = use.Used

	period := 360 / float64(p.Symmetry)
	if p.Symmetry > 1 {
		alt := angle.Wrap360(theta + period)
		est.AltBearingDeg = &alt
		if p.Symmetry > 2 {
			est.warn(FlagAmbiguous, "pattern has a %d-fold ambiguity: bearings every %.0f° fit equally", p.Symmetry, period)
		}
	}

	// Residual RMS in dB over the cells used.
	var rr, nn float64
	for k, cl := range f.cells {
		if !cl.clipped && f.w[k] > 0 {
			rr += cl.n * f.r[k] * f.r[k]
			nn += cl.n
		}
	}
	est.ResidualDB = math.Sqrt(rr / nn)

	// The feature's heading(s): level = c + G(θ − φ), feature at G(f) → φ = θ − f.
	fdeg := p.FeatureDeg()
	halfW := math.Max(p.WidthDeg()/2, 5)
	near := false
	for k := 0; k < p.Symmetry; k++ {
		fh := angle.Wrap360(theta - fdeg + float64(k)*period)
		for _, cl := range f.cells {
			if math.Abs(angle.Wrap180(cl.h-fh)) <= halfW {
				near = true
			}
		}
	}
	if !near {
		return Estimate{}, fmt.Errorf("fit bearing: %w (fitted %.1f°, no reading within %.0f° of the feature; covered %s)", ErrNoOverlap, theta, halfW, FormatArcs(est.Arcs))
	}

	sm := smoothGrid(clear)
	est.NullDepthDB = depth(sm, p, theta, halfW)

	// Flags and warnings: only where something is wrong.
	if use.Clipped > 0 {
		est.warn(FlagClipping, "clipping: %d of %d readings at the ADC's rails, used as lower bounds on the level", use.Clipped, use.Readings)
	}
	if cov < 330 {
		est.warn(FlagPartial, "partial sweep: %.0f° of 360° covered (%s)", cov, FormatArcs(est.Arcs))
	}
	if p.Mode == Peak {
		fh := angle.Wrap360(theta - fdeg)
		w := p.WidthDeg() / 2
		for d := -w; d <= w; d += 0.5 {
			if inGap(fh+d, gaps) {
				est.warn(FlagPartial, "partial sweep: main lobe (±%.0f° around %.0f°) not fully covered", w, fh)
				break
			}
		}
	}
	if fading && modelSigma > 1.5*fisher {
		what := "in a way that does not repeat with heading"
		if passes < 1.8 {
			what = "(fading, or multipath: one pass over each heading cannot tell them apart)"
		}
		est.warn(FlagFading, "fading: the level wandered by %.1f dB RMS (correlation time %.1f s) %s; modelled, sigma %.2f° widened to %.2f°",
			est.FadingDB, est.FadingTimeS, what, fisher, modelSigma)
	}
	if w, slope, mt := f.trendWarning(); w != "" {
		// The bearing with the trend taken out of the levels: how far it
		// moves is how much the trend can have moved it (one pass cannot
		// tell a trend from the pattern), and widens the sigma.
		y0 := append([]float64(nil), f.y...)
		for k, cl := range f.cells {
			f.y[k] -= slope * (cl.t - mt)
		}
		var td float64
		if fading {
			td, _ = f.glsGN(theta, c)
		} else {
			td, _ = f.whiteGN(theta, c)
		}
		copy(f.y, y0)
		f.eval(theta, c)
		shift := math.Abs(math.Mod(angle.Wrap180(td-theta)+period/2+4*360, period) - period/2)
		if s2 := math.Hypot(est.SigmaDeg, shift); s2 > est.SigmaDeg {
			est.SigmaDeg = s2
			w += fmt.Sprintf("; without it the bearing moves %.1f°: sigma widened to %.1f°", shift, s2)
		}
		est.warn(FlagTrend, "%s", w)
	}
	if w, sig := nullFill(sm, m, p, theta, c, thermal, floorDB, halfW); w != "" {
		est.warn(FlagMultipath, "%s; sigma widened to %.1f°", w, math.Max(est.SigmaDeg, sig))
		est.SigmaDeg = math.Max(est.SigmaDeg, sig)
	}
	if w := f.outlierWarning(p, theta, c, use); w != "" {
		est.warn(FlagMultipath, "%s", w)
	} else if w := multipathWarning(sm, m, p, theta, c, thermal, floorDB); w != "" {
		est.warn(FlagMultipath, "%s", w)
	} else if passes >= 1.8 && hac > 2*modelSigma && hac > 1 {
		est.warn(FlagMultipath, "multipath: level changes that repeat with heading over %.0f turns and that the pattern does not explain; sigma %.2f° widened to %.2f°", passes, modelSigma, hac)
	}
	// A second path biases the bearing, and a bias is what no sigma from
	// the residuals shows: the fit absorbs its part along the pattern's
	// slope. How far the bearing moves when each eighth of the sweep around
	// the feature is left out in turn bounds what a distortion confined to
	// some headings can have done; the sigma is widened to that spread.
	if est.HasFlag(FlagMultipath) {
		if jk, moved, n := f.sectorJackknife(theta, c, angle.Wrap360(theta-fdeg), 8, 360/float64(p.Symmetry), fading); n >= 4 && jk > est.SigmaDeg {
			est.warn(FlagMultipath, "multipath: the bearing moves up to %.1f° when any 45° of the sweep is left out: sigma widened from %.2f° to %.1f°", moved, est.SigmaDeg, jk)
			est.SigmaDeg = jk
		}
	}

	// Residual bootstrap (independent cells only).
	if o.Bootstrap > 0 && !fading {
		est.BootstrapSigmaDeg = f.bootstrap(theta, c, o.Bootstrap, o.Seed, period)
		bs, fs := est.BootstrapSigmaDeg, est.FisherSigmaDeg
		if bs > 2*fs || fs > 2*bs {
			est.warn(FlagUncertain, "uncertainty: bootstrap %.2f° and Fisher %.2f° disagree; reporting the larger", bs, fs)
			est.SigmaDeg = math.Max(est.SigmaDeg, bs)
		}
	}
	return est, nil
}

// dbScale is a robust scale of the dB residuals of the unclipped cells at
// the last eval: 1.4826 times their median absolute value (the MAD's
// consistency factor for Gaussian data, common practice).
func (f *fitter) dbScale() float64 {
	var a []float64
	for k, cl := range f.cells {
		if !cl.clipped {
			a = append(a, math.Abs(f.r[k]))
		}
	}
	return 1.4826 * median(a)
}

// dbLoss is Σ n·min(r², capDB²) over the unclipped cells at the last eval
// (r in dB), plus the censoring terms of clipped cells the model lies
// below.
func (f *fitter) dbLoss(capDB float64) float64 {
	var s float64
	for k, cl := range f.cells {
		if cl.clipped && !f.act[k] {
			continue
		}
		s += cl.n * math.Min(f.r[k]*f.r[k], capDB*capDB)
	}
	return s
}

// significance tests whether the level changes with heading at all,
// whatever the pattern: the cells with robust weight > 0, dB levels with
// equal weight per reading, grouped in 10° sectors; the statistic is
// N·log(SSE₀/SSE₁) of sector means against one constant level (a
// likelihood ratio, χ² with sectors − 1 degrees of freedom under noise
// alone), and the threshold its 1 − 10⁻⁶ quantile (gonum distuv). A
// pattern that fits badly is a matter for the flags, not a refusal. It
// also returns the white normal matrix.
func (f *fitter) significance() (lr, threshold, a11, a12, a22 float64) {
	a11, a12, a22, _, _ = f.whiteNormal()
	var sn, sy [36]float64
	var tn, ty float64
	n := 0
	for k, cl := range f.cells {
		if cl.clipped || f.w[k] == 0 {
			continue
		}
		i := int(cl.h/10) % 36
		sn[i] += cl.n
		sy[i] += cl.n * f.y[k]
		tn += cl.n
		ty += cl.n * f.y[k]
		n++
	}
	var sse0, sse1 float64
	sectors := 0
	for i := range sn {
		if sn[i] > 0 {
			sectors++
		}
	}
	for k, cl := range f.cells {
		if cl.clipped || f.w[k] == 0 {
			continue
		}
		i := int(cl.h/10) % 36
		d0 := f.y[k] - ty/tn
		d1 := f.y[k] - sy[i]/sn[i]
		sse0 += cl.n * d0 * d0
		sse1 += cl.n * d1 * d1
	}
	if sectors < 2 || n <= sectors || !(sse1 > 0) {
		return 0, math.Inf(1), a11, a12, a22
	}
	threshold = distuv.ChiSquared{K: float64(sectors - 1)}.Quantile(1 - 1e-6)
	return float64(n) * math.Log(sse0/sse1), threshold, a11, a12, a22
}

// FittedLevelDB returns the level the fit predicts at headingDeg with
// pattern p (the pattern the estimate was fitted with): LevelDB + G(θ − φ)
// for NoiseDB, 10·log10(carrier·p + noise) for NoiseThermal.
func (e Estimate) FittedLevelDB(p Pattern, headingDeg float64) float64 {
	if p.Validate() != nil {
		return math.NaN()
	}
	return levelAt(newModel(p), e.Noise == NoiseThermal, e.BearingDeg, e.LevelDB, e.NoiseFloorDB, headingDeg)
}

// levelAt returns the fitted level in dB at heading h: c + G for the dB
// model, floor + 10·log10(S·p + 1) with S = 10^((c − floor)/10) thermal.
func levelAt(m *model, thermal bool, theta, c, floorDB, h float64) float64 {
	if !thermal {
		return c + m.gainDB(theta-h)
	}
	pw, _ := m.power(theta - h)
	return floorDB + 10*math.Log10(math.Pow(10, (c-floorDB)/10)*pw+1)
}

// bootstrap refits resampled standardised residuals (white model) and
// returns the RMS spread of the refitted bearings (modulo the period).
func (f *fitter) bootstrap(theta, c float64, nboot int, seed uint64, period float64) float64 {
	f.eval(theta, c)
	var idx []int
	for k, cl := range f.cells {
		if !cl.clipped && f.w[k] > 0 {
			idx = append(idx, k)
		}
	}
	n := len(idx)
	if n < 3 {
		return 0
	}
	mu := append([]float64(nil), f.mu...)
	sv := make([]float64, len(f.v))
	for k := range sv {
		sv[k] = math.Sqrt(f.v[k])
	}
	e := make([]float64, n)
	var mean float64
	infl := math.Sqrt(float64(n) / float64(n-2))
	for i, k := range idx {
		e[i] = f.r[k] / sv[k] * infl
		mean += e[i]
	}
	mean /= float64(n)
	for i := range e {
		e[i] -= mean
	}
	y0 := append([]float64(nil), f.y...)
	defer copy(f.y, y0)
	rng := rand.New(rand.NewPCG(seed, 0x6e756c6c7365656b))
	var acc float64
	for b := 0; b < nboot; b++ {
		copy(f.y, y0)
		for _, k := range idx {
			f.y[k] = mu[k] + e[rng.IntN(n)]*sv[k]
		}
		t, _ := f.whiteGN(theta, c)
		d := math.Mod(angle.Wrap180(t-theta)+period/2+360*4, period) - period/2
		acc += d * d
	}
	copy(f.y, y0)
	f.eval(theta, c)
	return math.Sqrt(acc / float64(nboot))
}

// trendWarning regresses the white model's residuals (dB) of the cells
// used on time and warns when the level drifted by more than 1 dB over the
// sweep at more than 4 standard errors.
func (f *fitter) trendWarning() (string, float64, float64) {
	var sw, st, sr, stt, str float64
	t0, t1 := math.Inf(1), math.Inf(-1)
	n := 0
	for k, cl := range f.cells {
		if cl.clipped || f.w[k] == 0 {
			continue
		}
		w := f.w[k] / f.v[k]
		sw += w
		st += w * cl.t
		sr += w * f.r[k]
		stt += w * cl.t * cl.t
		str += w * cl.t * f.r[k]
		t0 = math.Min(t0, cl.t)
		t1 = math.Max(t1, cl.t)
		n++
	}
	varT := stt - st*st/sw
	if !(varT > 0) || !(t1 > t0) || n < 4 {
		return "", 0, 0
	}
	slope := (str - st*sr/sw) / varT
	var rss float64
	mt, mr := st/sw, sr/sw
	for k, cl := range f.cells {
		if cl.clipped || f.w[k] == 0 {
			continue
		}
		e := f.r[k] - mr - slope*(cl.t-mt)
		rss += f.w[k] / f.v[k] * e * e
	}
	se := math.Sqrt(rss / float64(n-2) / varT)
	change := slope * (t1 - t0)
	if math.Abs(change) > 1 && math.Abs(slope) > 4*se {
		return fmt.Sprintf("level trend: %+.1f dB over the %.0f s sweep (transmitter or path changed while turning)", change, t1-t0), slope, mt
	}
	return "", 0, 0
}

// outlierWarning names a stretch of headings that the robust fit left
// out as far above the pattern (4 dB or more: a second path's lobe) when
// it holds more than 3% of the cells.
func (f *fitter) outlierWarning(p Pattern, theta, c float64, use Usage) string {
	var n, above, readings int
	var sx, sy, sr float64
	for k, cl := range f.cells {
		if cl.clipped {
			continue
		}
		n++
		if f.w[k] == 0 && f.r[k] > 4 {
			above++
			readings += int(cl.n)
			s, co := math.Sincos(cl.h * math.Pi / 180)
			sx += s
			sy += co
			sr += f.r[k]
		}
	}
	if n == 0 || float64(above) < 0.03*float64(n) {
		return ""
	}
	h := angle.Wrap360(math.Atan2(sx, sy) * 180 / math.Pi)
	return fmt.Sprintf("multipath: %d readings around heading %.0f° lie %.0f dB above the pattern on average (a second path?) and were left out",
		readings, h, sr/float64(above))
}

// turns is how many times the headings went round: the heading travelled
// between consecutive readings (in time order), over 360°.
func turns(pts []Point) float64 {
	var s float64
	for i := 1; i < len(pts); i++ {
		s += math.Abs(angle.Wrap180(pts[i].HeadingDeg - pts[i-1].HeadingDeg))
	}
	return s / 360
}

// nullFill looks at a Null pattern's fitted null(s) on the smoothed levels
// sm: when the lowest level within halfW of a null lies more than 3 dB above
// the fitted model there (noise included), something fills the null — a
// second path, most often: a small loop's null filled by a reflection of
// relative field ρ at phase ψ moves by ½·atan(2ρ·cos ψ/(1 − ρ²)) (the
// two fields add; derived for this project from |sin δ − ρ·e^{jψ}·cos δ|²).
// The fill cannot tell ψ, so the sigma it returns is the half-width of the
// nominal pattern's null at the filled level: the angle over which the
// pattern stays below it (for a loop ≈ the fill's field ratio in radians,
// about the RMS of the shift over ψ for a given fill). "" when the null is
// as deep as the model says.
func nullFill(sm []float64, m *model, p Pattern, theta, c float64, thermal bool, floorDB, halfW float64) (string, float64) {
	if p.Mode != Null {
		return "", 0
	}
	period := 360 / float64(p.Symmetry)
	fdeg := p.FeatureDeg()
	lo, at := math.Inf(1), 0.0
	w := int(math.Ceil(halfW))
	for k := 0; k < p.Symmetry; k++ {
		fh := angle.Wrap360(theta - fdeg + float64(k)*period)
		for d := -w; d <= w; d++ {
			i := (int(math.Round(fh)) + d + 2*PatternSteps) % PatternSteps
			if v := sm[i]; !math.IsNaN(v) && v < lo {
				lo, at = v, float64(i)
			}
		}
	}
	if math.IsInf(lo, 1) {
		return "", 0
	}
	model := levelAt(m, thermal, theta, c, floorDB, at)
	excess := lo - model
	if excess < 3 {
		return "", 0
	}
	rel := lo - c // the filled null's level under the pattern's 0 dB
	half := func(dir float64) float64 {
		for d := 0.25; d <= 90; d += 0.25 {
			if m.gainDB(fdeg+dir*d) >= rel {
				return d
			}
		}
		return 90
	}
	sig := (half(1) + half(-1)) / 2
	return fmt.Sprintf("multipath: the null is filled %.0f dB above the pattern's (to %.0f dB under the peak): a second path?", excess, -rel), sig
}
