package geo

import (
	"errors"
	"fmt"
	"math"
	"nullseek/internal/angle"
	"strings"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"
)

// Reasons a fix is refused. SolveFix wraps them with the details, so test
// with errors.Is.
var (
	ErrTooFewBearings = errors.New("fewer than two usable bearings")
	ErrParallel       = errors.New("bearings are nearly parallel")
	ErrDiverging      = errors.New("bearings point away from each other")
	ErrBehind         = errors.New("the fix would lie behind a station")
	ErrTooFar         = errors.New("the fix is implausibly far from the stations")
)

// FixOptions tunes SolveFix; the zero value gives the defaults.
type FixOptions struct {
	// Probability of the reported error ellipse (0 < P < 1); default 0.95.
	Probability float64
	// MinCrossingDeg: when no two bearings cross at this angle or more the
	// fix is refused as nearly parallel; default 3°.
	MinCrossingDeg float64
	// OutlierAlpha is the per-bearing false-alarm probability of the
	// leave-one-out outlier test (chi-square, 1 degree of freedom), and also
	// of the overall consistency test; default 0.001.
	OutlierAlpha float64
	// MaxRangeM refuses fixes farther than this from the nearest station;
	// default 1000 km.
	MaxRangeM float64
}

func (o FixOptions) withDefaults() FixOptions {
	if !(o.Probability > 0 && o.Probability < 1) {
		o.Probability = 0.95
	}
	if !(o.MinCrossingDeg > 0) {
		o.MinCrossingDeg = 3
	}
	if !(o.OutlierAlpha > 0 && o.OutlierAlpha < 1) {
		o.OutlierAlpha = 0.001
	}
	if !(o.MaxRangeM > 0) {
		o.MaxRangeM = 1000e3
	}
	return o
}

// Ellipse is an error ellipse on the local east/north plane at the fix.
type Ellipse struct {
	SemiMajorM float64 `json:"semi_major_m"`
	SemiMinorM float64 `json:"semi_minor_m"`
	// OrientationDeg is the azimuth of the major axis, clockwise from true
	// north, in [0, 180).
	OrientationDeg float64 `json:"orientation_deg"`
	// Probability that the true point lies inside (bivariate normal model).
	Probability float64 `json:"probability"`
}

// EllipseK is the scale factor from a 1-sigma ellipse to one holding
// probability p of a bivariate normal: k = √(−2 ln(1−p)) (Stansfield 1947;
// 0.95 → 2.4477). It returns NaN outside 0 < p < 1.
func EllipseK(p float64) float64 {
	if !(p > 0 && p < 1) {
		return math.NaN()
	}
	return math.Sqrt(-2 * math.Log(1-p))
}

// EllipseFromCov returns the ellipse holding probability p for a 2×2
// covariance [[ee, en], [en, nn]] in m² (east, north).
func EllipseFromCov(ee, en, nn, p float64) Ellipse {
	var es mat.EigenSym
	ok := es.Factorize(mat.NewSymDense(2, []float64{ee, en, en, nn}), true)
	k := EllipseK(p)
	if !ok {
		return Ellipse{math.NaN(), math.NaN(), math.NaN(), p}
	}
	vals := es.Values(nil) // ascending
	var vec mat.Dense
	es.VectorsTo(&vec)
	ve, vn := vec.At(0, 1), vec.At(1, 1)
	return Ellipse{
		SemiMajorM:     k * math.Sqrt(math.Max(vals[1], 0)),
		SemiMinorM:     k * math.Sqrt(math.Max(vals[0], 0)),
		OrientationDeg: math.Mod(angle.Wrap360(math.Atan2(ve, vn)*rad), 180),
		Probability:    p,
	}
}

// BearingUse is one input bearing with its fate in the fix.
type BearingUse struct {
	LOP
	Used bool
	// ResidualDeg = measured bearing − bearing from the station to the fix,
	// wrapped to (−180, 180].
	ResidualDeg float64
	// DistM is the geodesic distance from the station to the fix.
	DistM float64
	// Reason says why the bearing was rejected ("" when used).
	Reason string
}

// Fix is a position estimate from bearings.
type Fix struct {
	Ident    string
	Lat, Lon float64 // degrees, WGS84
	// CovEE, CovEN, CovNN: 1-sigma covariance in m² on the local east/north
	// plane at the fix (inverse Fisher information, times VarianceFactor).
	CovEE, CovEN, CovNN float64
	Ellipse             Ellipse // at the requested probability
	Ellipse1Sigma       Ellipse
	Bearings            []BearingUse // in input order
	// CockedHatM is the largest distance between two forward crossing points
	// of the used bearings taken in pairs on the plane at the fix (for three
	// bearings: the longest side of the cocked hat); 0 with two bearings.
	CockedHatM float64
	// CockedHatAreaM2 is the triangle's area when exactly three bearings are
	// used and all three pairs cross in front of their stations, else 0.
	CockedHatAreaM2 float64
	// Chi2 = Σ (residual/sigma)² over used bearings; DOF = used − 2.
	Chi2 float64
	DOF  int
	// VarianceFactor ≥ 1 multiplies the covariance when the used bearings
	// disagree more than their sigmas allow (overall chi-square test failed).
	VarianceFactor float64
	Iterations     int
	Warnings       []string

	// Filled by Place.
	Maidenhead string
	GridCell   string
	Cells      []CellProb
}

// Used returns the LOPs that went into the fix.
func (f *Fix) Used() []LOP {
	var out []LOP
	for _, b := range f.Bearings {
		if b.Used {
			out = append(out, b.LOP)
		}
	}
	return out
}

// solver carries the LOPs in radians.
type solver struct {
	lops   []LOP
	phi    []float64 // measured bearing, rad
	w      []float64 // 1/σ², rad⁻²
	opt    FixOptions
	iters  int
	reason []string
}

// SolveFix computes the maximum-likelihood position of one transmitter from
// its bearings: a Stansfield start point (weights 1/(d²σ²), d re-estimated
// three times), then Gauss–Newton on the wrapped bearing residuals, each step
// solved on the east/north tangent plane at the current estimate and applied
// with the exact geodesic (Direct). The covariance is the inverse Fisher
// information at the solution. Invalid LOPs are rejected with a reason, not
// fatal. With three or more bearings a bearing whose fix would lie behind its
// station is rejected when the others still fix; with four or more the
// bearing most at odds with the fix of the others (leave-one-out, chi-square
// 1 dof at OutlierAlpha) is rejected, repeatedly while at least three stay.
// When the remaining bearings still disagree beyond the overall chi-square
// test, the covariance is widened by χ²/dof and a warning added.
//
// Refusals (wrapping ErrTooFewBearings, ErrParallel, ErrDiverging,
// ErrBehind, ErrTooFar) come with a message naming the stations involved.
func SolveFix(lops []LOP, opt FixOptions) (*Fix, error) {
	s := &solver{lops: lops, opt: opt.withDefaults()}
	n := len(lops)
	s.phi = make([]float64, n)
	s.w = make([]float64, n)
	s.reason = make([]string, n)
	var active []int
	for i, l := range lops {
		if err := l.Validate(); err != nil {
			s.reason[i] = "invalid: " + err.Error()
			continue
		}
		s.phi[i] = l.BearingDeg * deg
		sg := l.SigmaDeg * deg
		s.w[i] = 1 / (sg * sg)
		active = append(active, i)
	}
	ident := ""
	if n > 0 {
		ident = lops[0].Ident
	}
	var lat, lon float64
	for {
		if len(active) < 2 {
			return nil, fmt.Errorf("%s: %w (%d given, %d usable)%s", identName(ident), ErrTooFewBearings, n, len(active), s.rejectNote())
		}
		var err error
		var away []int
		lat, lon, away, err = s.solveSet(active)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", identName(ident), err)
		}
		if len(away) > 0 {
			for _, i := range away {
				s.reason[i] = "points away from where the other bearings cross"
				active = remove(active, i)
			}
			continue
		}
		// Bearings whose station sees the fix behind it.
		var behind, front []int
		for _, i := range active {
			if math.Abs(s.residual(i, lat, lon)) > math.Pi/2 {
				behind = append(behind, i)
			} else {
				front = append(front, i)
			}
		}
		if len(behind) > 0 {
			if len(front) >= 2 && len(active) >= 3 {
				for _, i := range behind {
					s.reason[i] = "points away from where the other bearings cross"
				}
				active = front
				continue
			}
			if len(front) == 0 {
				return nil, fmt.Errorf("%s: %w: the lines cross behind %s", identName(ident), ErrDiverging, s.names(behind))
			}
			return nil, fmt.Errorf("%s: %w: the lines cross behind %s", identName(ident), ErrBehind, s.names(behind))
		}
		if len(active) >= 4 {
			if worst, tWorst, eDeg := s.leaveOneOut(active, lat, lon); worst >= 0 {
				thr := distuv.ChiSquared{K: 1}.Quantile(1 - s.opt.OutlierAlpha)
				if tWorst > thr {
					s.reason[worst] = fmt.Sprintf("outlier: %.1f° (%.1f sigma) off the fix of the other bearings", eDeg, math.Sqrt(tWorst))
					active = remove(active, worst)
					continue
				}
			}
		}
		break
	}
	return s.finish(ident, active, lat, lon)
}

func identName(ident string) string {
	if ident == "" {
		return "fix"
	}
	return ident
}

func (s *solver) rejectNote() string {
	var parts []string
	for i, r := range s.reason {
		if r != "" {
			parts = append(parts, s.lops[i].where()+" "+r)
		}
	}
	if len(parts) == 0 {
		return ""
	}
	return "; rejected: " + strings.Join(parts, "; ")
}

func (s *solver) names(idx []int) string {
	parts := make([]string, len(idx))
	for k, i := range idx {
		parts[k] = s.lops[i].where()
	}
	return strings.Join(parts, " and ")
}

func remove(a []int, v int) []int {
	out := make([]int, 0, len(a))
	for _, x := range a {
		if x != v {
			out = append(out, x)
		}
	}
	return out
}

// residual is measured − predicted bearing (rad, wrapped) of LOP i at a point.
func (s *solver) residual(i int, lat, lon float64) float64 {
	l := s.lops[i]
	_, azi1, _ := Inverse(l.Lat, l.Lon, lat, lon)
	return wrapPi(s.phi[i] - azi1*deg)
}

// solveSet finds the ML point for the active bearings, or, with three or
// more, the bearings that point away from the best start point (away).
func (s *solver) solveSet(active []int) (lat, lon float64, away []int, err error) {
	if err := s.checkCrossing(active); err != nil {
		return 0, 0, nil, err
	}
	lat, lon, away, err = s.start(active)
	if err != nil || len(away) > 0 {
		return 0, 0, away, err
	}
	lat, lon, err = s.gaussNewton(active, lat, lon, 60)
	if err != nil {
		return 0, 0, nil, err
	}
	near := math.Inf(1)
	for _, i := range active {
		d, _, _ := Inverse(s.lops[i].Lat, s.lops[i].Lon, lat, lon)
		near = math.Min(near, d)
	}
	if near > s.opt.MaxRangeM {
		return 0, 0, nil, fmt.Errorf("%w: %.0f km from the nearest station (limit %.0f km)", ErrTooFar, near/1e3, s.opt.MaxRangeM/1e3)
	}
	return lat, lon, nil, nil
}

// crossDeg is the acute angle (degrees, 0..90) between two bearings' lines.
func crossDeg(a, b float64) float64 {
	return math.Asin(math.Min(1, math.Abs(math.Sin(a-b)))) * rad
}

func (s *solver) checkCrossing(active []int) error {
	best := 0.0
	for x, i := range active {
		for _, j := range active[x+1:] {
			best = math.Max(best, crossDeg(s.phi[i], s.phi[j]))
		}
	}
	if best < s.opt.MinCrossingDeg {
		return fmt.Errorf("%w: the widest crossing angle is %.1f° (need at least %.1f°); take a bearing from a station off to the side", ErrParallel, best, s.opt.MinCrossingDeg)
	}
	return nil
}

// plane holds the active stations on a tangent plane.
type plane struct {
	lat0, lon0 float64
	e, n       []float64
}

func (s *solver) plane(active []int, lat0, lon0 float64) plane {
	p := plane{lat0: lat0, lon0: lon0, e: make([]float64, len(active)), n: make([]float64, len(active))}
	for k, i := range active {
		p.e[k], p.n[k] = ENU(lat0, lon0, s.lops[i].Lat, s.lops[i].Lon)
	}
	return p
}

// start returns the Stansfield point. When that lies behind some stations
// (possible with a wild bearing among three or more) it picks, among the
// forward pairwise crossings, the one with the least robust cost
// Σ min((r/σ)², 9) and returns the bearings that point away from it.
func (s *solver) start(active []int) (lat, lon float64, away []int, err error) {
	i0 := active[0]
	pl := s.plane(active, s.lops[i0].Lat, s.lops[i0].Lon)
	m := len(active)
	d2 := make([]float64, m)
	for k := range d2 {
		d2[k] = 1
	}
	var pe, pn float64
	for iter := 0; iter < 4; iter++ {
		var a, b, c, be, bn float64
		for k, i := range active {
			ww := s.w[i] / d2[k]
			cs, sn := math.Cos(s.phi[i]), math.Sin(s.phi[i])
			// normal n = (cos φ, −sin φ); n nᵀ = [[c², −cs], [−cs, s²]]
			a += ww * cs * cs
			b += ww * sn * cs
			c += ww * sn * sn
			dot := cs*pl.e[k] - sn*pl.n[k]
			be += ww * cs * dot
			bn += ww * -sn * dot
		}
		det := a*c - b*b
		if !(det > 0) {
			return 0, 0, nil, fmt.Errorf("%w: the crossing is ill-conditioned", ErrParallel)
		}
		pe = (c*be + b*bn) / det
		pn = (b*be + a*bn) / det
		for k := range d2 {
			d2[k] = math.Max(sq(pe-pl.e[k])+sq(pn-pl.n[k]), 1)
		}
	}
	var behind []int
	for k, i := range active {
		if math.Sin(s.phi[i])*(pe-pl.e[k])+math.Cos(s.phi[i])*(pn-pl.n[k]) < 0 {
			behind = append(behind, i)
		}
	}
	if len(behind) == 0 {
		lat, lon = FromENU(pl.lat0, pl.lon0, pe, pn)
		return lat, lon, nil, nil
	}
	if len(behind) == m {
		return 0, 0, nil, fmt.Errorf("%w: the lines cross %.1f km behind the stations", ErrDiverging, math.Sqrt(d2[0])/1e3)
	}
	if m == 2 {
		return 0, 0, nil, fmt.Errorf("%w: the lines cross behind %s", ErrBehind, s.names(behind))
	}
	bestCost := math.Inf(1)
	var bestE, bestN float64
	for x := 0; x < m; x++ {
		for y := x + 1; y < m; y++ {
			e, n, ok := crossing(pl.e[x], pl.n[x], s.phi[active[x]], pl.e[y], pl.n[y], s.phi[active[y]], s.opt.MinCrossingDeg)
			if !ok {
				continue
			}
			var cost float64
			for k, i := range active {
				r := wrapPi(s.phi[i] - math.Atan2(e-pl.e[k], n-pl.n[k]))
				cost += math.Min(s.w[i]*r*r, 9)
			}
			if cost < bestCost {
				bestCost, bestE, bestN = cost, e, n
			}
		}
	}
	if math.IsInf(bestCost, 1) {
		return 0, 0, nil, fmt.Errorf("%w: no two bearings cross in front of their stations", ErrDiverging)
	}
	for k, i := range active {
		if math.Sin(s.phi[i])*(bestE-pl.e[k])+math.Cos(s.phi[i])*(bestN-pl.n[k]) < 0 {
			away = append(away, i)
		}
	}
	if m-len(away) < 2 {
		return 0, 0, nil, fmt.Errorf("%w: the lines cross behind %s", ErrBehind, s.names(away))
	}
	lat, lon = FromENU(pl.lat0, pl.lon0, bestE, bestN)
	return lat, lon, away, nil
}

// crossing intersects two rays on a plane (station, bearing in rad) and
// reports whether they meet in front of both at an angle ≥ minDeg.
func crossing(e1, n1, phi1, e2, n2, phi2, minDeg float64) (e, n float64, ok bool) {
	if crossDeg(phi1, phi2) < minDeg {
		return 0, 0, false
	}
	u1e, u1n := math.Sin(phi1), math.Cos(phi1)
	u2e, u2n := math.Sin(phi2), math.Cos(phi2)
	den := u1e*u2n - u1n*u2e
	de, dn := e2-e1, n2-n1
	t1 := (de*u2n - dn*u2e) / den
	t2 := (de*u1n - dn*u1e) / den
	if !(t1 > 0 && t2 > 0) {
		return 0, 0, false
	}
	return e1 + t1*u1e, n1 + t1*u1n, true
}

func sq(x float64) float64 { return x * x }

// normal accumulates the Gauss–Newton normal equations at a point: the
// information matrix H (m⁻²), the gradient g (m⁻¹·rad) and the cost Σwr².
// The Jacobian of the bearing at station i with respect to moving the point
// east/north is (cos α₂, −sin α₂)/s where α₂ is the geodesic's forward
// azimuth at the point and s its length.
func (s *solver) normal(active []int, lat, lon float64) (hee, hen, hnn, ge, gn, cost float64) {
	for _, i := range active {
		l := s.lops[i]
		d, azi1, azi2 := Inverse(l.Lat, l.Lon, lat, lon)
		r := wrapPi(s.phi[i] - azi1*deg)
		cost += s.w[i] * r * r
		if d < 1e-3 {
			continue
		}
		a2 := azi2 * deg
		je, jn := math.Cos(a2)/d, -math.Sin(a2)/d
		hee += s.w[i] * je * je
		hen += s.w[i] * je * jn
		hnn += s.w[i] * jn * jn
		ge += s.w[i] * je * r
		gn += s.w[i] * jn * r
	}
	return
}

func (s *solver) cost(active []int, lat, lon float64) float64 {
	var c float64
	for _, i := range active {
		r := s.residual(i, lat, lon)
		c += s.w[i] * r * r
	}
	return c
}

// gaussNewton refines a start point; steps are taken with Direct and halved
// until the cost does not grow.
func (s *solver) gaussNewton(active []int, lat, lon float64, maxIter int) (float64, float64, error) {
	for it := 0; it < maxIter; it++ {
		s.iters++
		hee, hen, hnn, ge, gn, cost := s.normal(active, lat, lon)
		det := hee*hnn - hen*hen
		if !(det > 0) || det < 1e-30*sq(hee+hnn) {
			return 0, 0, fmt.Errorf("%w: the information matrix is singular", ErrParallel)
		}
		de := (hnn*ge - hen*gn) / det
		dn := (hee*gn - hen*ge) / det
		step := math.Hypot(de, dn)
		az := math.Atan2(de, dn) * rad
		if step < 1e-4 {
			// Converged: the last step is below 0.1 mm; take it as is.
			nl, no, _ := Direct(lat, lon, az, step)
			return nl, no, nil
		}
		lam := 1.0
		improved := false
		var nl, no float64
		for h := 0; h < 16; h++ {
			nl, no, _ = Direct(lat, lon, az, step*lam)
			if s.cost(active, nl, no) <= cost {
				improved = true
				break
			}
			lam /= 2
		}
		if !improved {
			// No step lowers the cost: we are at the minimum to rounding.
			return lat, lon, nil
		}
		lat, lon = nl, no
	}
	return lat, lon, nil
}

// leaveOneOut returns the active bearing with the largest predicted-residual
// statistic t = e²/(σ² + gᵀ C₋ᵢ g), where e is its residual against the fix
// of the others and C₋ᵢ that fix's covariance; -1 when none can be tested.
func (s *solver) leaveOneOut(active []int, lat, lon float64) (worst int, tWorst, eDeg float64) {
	worst = -1
	for _, i := range active {
		others := remove(active, i)
		if s.checkCrossing(others) != nil {
			continue
		}
		// Two steps from the full fix reach the leave-one-out fix closely
		// enough for a test statistic.
		la, lo, err := s.gaussNewton(others, lat, lon, 2)
		if err != nil {
			continue
		}
		hee, hen, hnn, _, _, _ := s.normal(others, la, lo)
		det := hee*hnn - hen*hen
		if !(det > 0) {
			continue
		}
		cee, cen, cnn := hnn/det, -hen/det, hee/det
		l := s.lops[i]
		d, azi1, azi2 := Inverse(l.Lat, l.Lon, la, lo)
		e := wrapPi(s.phi[i] - azi1*deg)
		v := 1 / s.w[i]
		if d > 1e-3 {
			a2 := azi2 * deg
			je, jn := math.Cos(a2)/d, -math.Sin(a2)/d
			v += je*je*cee + 2*je*jn*cen + jn*jn*cnn
		}
		t := e * e / v
		if t > tWorst {
			worst, tWorst, eDeg = i, t, e*rad
		}
	}
	return worst, tWorst, eDeg
}

func (s *solver) finish(ident string, active []int, lat, lon float64) (*Fix, error) {
	f := &Fix{Ident: ident, Lat: lat, Lon: lon, Iterations: s.iters, VarianceFactor: 1}
	hee, hen, hnn, _, _, cost := s.normal(active, lat, lon)
	det := hee*hnn - hen*hen
	if !(det > 0) {
		return nil, fmt.Errorf("%s: %w: the information matrix is singular", identName(ident), ErrParallel)
	}
	f.CovEE, f.CovEN, f.CovNN = hnn/det, -hen/det, hee/det
	f.Chi2, f.DOF = cost, len(active)-2
	if f.DOF >= 1 {
		thr := distuv.ChiSquared{K: float64(f.DOF)}.Quantile(1 - s.opt.OutlierAlpha)
		if f.Chi2 > thr {
			f.VarianceFactor = f.Chi2 / float64(f.DOF)
			f.CovEE *= f.VarianceFactor
			f.CovEN *= f.VarianceFactor
			f.CovNN *= f.VarianceFactor
			msg := fmt.Sprintf("the used bearings disagree more than their sigmas allow (chi-square %.1f with %d dof); ellipse widened by a factor %.1f", f.Chi2, f.DOF, math.Sqrt(f.VarianceFactor))
			if len(active) == 3 {
				msg += "; with three bearings the wrong one cannot be singled out: take another bearing"
			}
			f.Warnings = append(f.Warnings, msg)
		}
	}
	f.Ellipse = EllipseFromCov(f.CovEE, f.CovEN, f.CovNN, s.opt.Probability)
	f.Ellipse1Sigma = EllipseFromCov(f.CovEE, f.CovEN, f.CovNN, 1-math.Exp(-0.5))
	isActive := map[int]bool{}
	for _, i := range active {
		isActive[i] = true
	}
	for i, l := range s.lops {
		b := BearingUse{LOP: l, Used: isActive[i], Reason: s.reason[i]}
		if l.Validate() == nil {
			d, azi1, _ := Inverse(l.Lat, l.Lon, lat, lon)
			b.DistM = d
			b.ResidualDeg = wrapPi(s.phi[i]-azi1*deg) * rad
		}
		if b.Used {
			b.Reason = ""
		}
		f.Bearings = append(f.Bearings, b)
	}
	f.cockedHat(active, s)
	return f, nil
}

// cockedHat measures the spread of pairwise crossings on the plane at the fix.
func (f *Fix) cockedHat(active []int, s *solver) {
	if len(active) < 3 {
		return
	}
	pl := s.plane(active, f.Lat, f.Lon)
	m := len(active)
	// Plane bearings: the measured bearing turned by the difference between
	// the plane direction and the geodesic azimuth from the station to the fix.
	phi := make([]float64, m)
	for k, i := range active {
		phi[k] = s.phi[i]
		if d, azi1, _ := Inverse(s.lops[i].Lat, s.lops[i].Lon, f.Lat, f.Lon); d > 1e-3 {
			phi[k] += wrapPi(math.Atan2(-pl.e[k], -pl.n[k]) - azi1*deg)
		}
	}
	var xs, ys []float64
	for x := 0; x < m; x++ {
		for y := x + 1; y < m; y++ {
			if e, n, ok := crossing(pl.e[x], pl.n[x], phi[x], pl.e[y], pl.n[y], phi[y], s.opt.MinCrossingDeg); ok {
				xs, ys = append(xs, e), append(ys, n)
			}
		}
	}
	for a := range xs {
		for b := a + 1; b < len(xs); b++ {
			f.CockedHatM = math.Max(f.CockedHatM, math.Hypot(xs[a]-xs[b], ys[a]-ys[b]))
		}
	}
	if m == 3 && len(xs) == 3 {
		f.CockedHatAreaM2 = math.Abs((xs[1]-xs[0])*(ys[2]-ys[0])-(xs[2]-xs[0])*(ys[1]-ys[0])) / 2
	}
}
