package geo

import (
	"errors"
	"fmt"
	"math"
	"nullseek/internal/angle"
	"sort"
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

// FixOptions tunes SolveFix; the zero value gives the defaults
// (DefaultFixOptions), and so does a zero field.
type FixOptions struct {
	// Probability of the reported error ellipse (0 < P ≤ 0.9999); default 0.95.
	Probability float64
	// MinCrossingDeg: when no two stations' bearings cross at this angle or
	// more the fix is refused as nearly parallel; default 3°, at most 45°.
	MinCrossingDeg float64
	// PoorCrossingDeg: a fix whose widest crossing angle at the fix is below
	// this gets a warning (its ellipse is long along the bearings); default
	// 30°, at most 90°.
	PoorCrossingDeg float64
	// OutlierAlpha is the per-bearing false-alarm probability of the
	// leave-one-out outlier test (chi-square, 1 degree of freedom), and also
	// of the overall consistency test; default 0.001, at most 0.5.
	OutlierAlpha float64
	// MaxRangeM refuses fixes farther than this from the nearest station;
	// default 1000 km, at most 20,000 km (half the Earth's circumference).
	MaxRangeM float64
}

// DefaultFixOptions holds the defaults that a zero FixOptions field takes.
var DefaultFixOptions = FixOptions{Probability: 0.95, MinCrossingDeg: 3, PoorCrossingDeg: 30, OutlierAlpha: 0.001, MaxRangeM: 1000e3}

// Validate checks every field: zero (the default) or a finite number in the
// range documented on the field.
func (o FixOptions) Validate() error {
	check := func(name string, v, lo, hi float64, loOpen bool) error {
		if v == 0 {
			return nil
		}
		if math.IsNaN(v) || math.IsInf(v, 0) || v < lo || v > hi || (loOpen && v == lo) {
			return fmt.Errorf("fix option %s %v is outside %g..%g (0 for the default)", name, v, lo, hi)
		}
		return nil
	}
	for _, c := range []struct {
		name      string
		v, lo, hi float64
		loOpen    bool
	}{
		{"probability", o.Probability, 0, 0.9999, true},
		{"min crossing (deg)", o.MinCrossingDeg, 0, 45, true},
		{"poor crossing (deg)", o.PoorCrossingDeg, 0, 90, true},
		{"outlier alpha", o.OutlierAlpha, 0, 0.5, true},
		{"max range (m)", o.MaxRangeM, 0, 20000e3, true},
	} {
		if err := check(c.name, c.v, c.lo, c.hi, c.loOpen); err != nil {
			return err
		}
	}
	return nil
}

func (o FixOptions) withDefaults() FixOptions {
	d := DefaultFixOptions
	if o.Probability == 0 {
		o.Probability = d.Probability
	}
	if o.MinCrossingDeg == 0 {
		o.MinCrossingDeg = d.MinCrossingDeg
	}
	if o.PoorCrossingDeg == 0 {
		o.PoorCrossingDeg = d.PoorCrossingDeg
	}
	if o.OutlierAlpha == 0 {
		o.OutlierAlpha = d.OutlierAlpha
	}
	if o.MaxRangeM == 0 {
		o.MaxRangeM = d.MaxRangeM
	}
	return o
}

// Ellipse is an error ellipse on the local east/north plane at the fix. Its
// sizes are SEMI-axes (centre to edge); the ellipse is twice as long and
// twice as wide.
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
	// Stations is the number of distinct station positions among the used
	// bearings.
	Stations int
	// CrossingDeg is the widest angle (0..90°) at which the used stations'
	// lines of position cross at the fix (the directions of the geodesics
	// from the stations, taken at the fix).
	CrossingDeg float64
	// CockedHatM is the largest distance between two forward crossing points
	// of the used stations' lines taken in pairs on the plane at the fix
	// (for three stations: the longest side of the cocked hat). A station's
	// line is the weighted mean of its used bearings. It is computed only
	// with 3 to maxHatStations used stations: see HasCockedHat.
	CockedHatM   float64
	HasCockedHat bool
	// CockedHatAreaM2 is the triangle's area when exactly three stations are
	// used and all three pairs cross in front of their stations
	// (HasCockedHatArea); not computed otherwise.
	CockedHatAreaM2  float64
	HasCockedHatArea bool
	// Chi2 = Σ (residual/sigma)² over used bearings; DOF = used − 2.
	Chi2 float64
	DOF  int
	// VarianceFactor ≥ 1 multiplies the covariance when the used bearings
	// disagree more than their sigmas allow (overall chi-square test failed).
	VarianceFactor float64
	Iterations     int
	Warnings       []string
	// Ambiguities describes each station whose bearings were ambiguous by
	// 180° (set by SolveFixAmbiguous).
	Ambiguities []Ambiguity

	// Filled by Place: the locator, the grid used (nil without one), the
	// fix's cell and the most probable cells.
	Grid       *Grid
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

// maxHatStations bounds the stations over which the cocked hat is measured
// (the pairwise crossings grow as the square of the stations, their spread
// as the fourth power).
const maxHatStations = 40

// group is the bearings taken at one station position (same name, same
// latitude and longitude). For such bearings the cost Σ wᵢ wrap(φᵢ − θ)²,
// θ being the azimuth from the station to the trial point, equals
// W·(φ̄ − θ)² + S with W = Σ wᵢ, φ̄ the weighted mean bearing and S the
// weighted scatter about it, whenever every residual is within ±90° (then
// the offsets from the circular mean never wrap; see rebuild). The Jacobian
// is the same for all of them, so one geodesic per station and step gives
// the exact normal equations of all its bearings.
type group struct {
	station  string
	lat, lon float64
	ref      float64 // reference direction, rad: circular mean of the active members
	sw       float64 // Σ w over active members
	swd      float64 // Σ w·δ, δ = wrap(φ − ref)
	swd2     float64 // Σ w·δ²
	n        int     // active members
	// per-step values at the current point
	dist, azi1, azi2 float64 // m, rad, rad
}

func (g *group) mean() float64 { return g.ref + g.swd/g.sw }

func (g *group) scatter() float64 { return math.Max(g.swd2-g.swd*g.swd/g.sw, 0) }

// solver carries the LOPs in radians, grouped by station position.
type solver struct {
	lops   []LOP
	phi    []float64 // measured bearing, rad
	w      []float64 // 1/σ², rad⁻²
	grp    []int32   // group of each bearing, -1 when invalid
	active []bool
	nAct   int
	groups []group
	opt    FixOptions
	iters  int
	reason []string
}

type posKey struct {
	station  string
	lat, lon float64
}

// SolveFix computes the maximum-likelihood position of one transmitter from
// its bearings: a Stansfield start point (weights 1/(d²σ²), d re-estimated
// three times), then Gauss–Newton on the wrapped bearing residuals, each step
// solved on the east/north tangent plane at the current estimate and applied
// with the exact geodesic (Direct). The covariance is the inverse Fisher
// information at the solution. Bearings taken at the same station position
// share one geodesic per step (see group), so the cost is linear in the
// number of bearings. Invalid LOPs are rejected with a reason, not fatal.
// With three or more bearings a bearing whose fix would lie behind its
// station is rejected when the others still fix; with four or more the
// bearing most at odds with the fix of the others (leave-one-out, chi-square
// 1 dof at OutlierAlpha, the refit of the others linearised at the fix:
// t = w·r²/(1−h) with h the bearing's leverage) is rejected, repeatedly
// while at least three stay (from batchOutliers active bearings on, the
// others beyond the threshold go in the same pass, a few at a time). When
// the remaining bearings still disagree
// beyond the overall chi-square test, the covariance is widened by χ²/dof
// and a warning added; a widest crossing angle below PoorCrossingDeg is
// warned about.
//
// Refusals (wrapping ErrTooFewBearings, ErrParallel, ErrDiverging,
// ErrBehind, ErrTooFar) come with a message naming the stations involved;
// invalid options are an error of their own.
func SolveFix(lops []LOP, opt FixOptions) (*Fix, error) {
	if err := opt.Validate(); err != nil {
		return nil, err
	}
	s := &solver{lops: lops, opt: opt.withDefaults()}
	n := len(lops)
	s.phi = make([]float64, n)
	s.w = make([]float64, n)
	s.grp = make([]int32, n)
	s.active = make([]bool, n)
	s.reason = make([]string, n)
	index := map[posKey]int32{}
	for i, l := range lops {
		s.grp[i] = -1
		if err := l.Validate(); err != nil {
			s.reason[i] = "invalid: " + err.Error()
			continue
		}
		s.phi[i] = l.BearingDeg * deg
		sg := l.SigmaDeg * deg
		s.w[i] = 1 / (sg * sg)
		k := posKey{l.Station, l.Lat, l.Lon}
		g, ok := index[k]
		if !ok {
			g = int32(len(s.groups))
			index[k] = g
			s.groups = append(s.groups, group{station: l.Station, lat: l.Lat, lon: l.Lon})
		}
		s.grp[i] = g
		s.active[i] = true
		s.nAct++
	}
	s.rebuild()
	ident := ""
	if n > 0 {
		ident = lops[0].Ident
	}
	var lat, lon float64
	for {
		if s.nAct < 2 {
			return nil, fmt.Errorf("%s: %w (%d given, %d usable)%s", identName(ident), ErrTooFewBearings, n, s.nAct, s.rejectNote())
		}
		var err error
		var away []int
		lat, lon, away, err = s.solveSet()
		if err != nil {
			return nil, fmt.Errorf("%s: %w", identName(ident), err)
		}
		if len(away) > 0 {
			for _, i := range away {
				s.reason[i] = "points away from where the other bearings cross"
				s.active[i] = false
				s.nAct--
			}
			s.rebuild()
			continue
		}
		// Bearings whose station sees the fix behind it.
		s.at(lat, lon)
		var behind []int
		front := 0
		for i, a := range s.active {
			if !a {
				continue
			}
			if math.Abs(wrapPi(s.phi[i]-s.groups[s.grp[i]].azi1)) > math.Pi/2 {
				behind = append(behind, i)
			} else {
				front++
			}
		}
		if len(behind) > 0 {
			if front >= 2 && s.nAct >= 3 {
				for _, i := range behind {
					s.reason[i] = "points away from where the other bearings cross"
					s.active[i] = false
					s.nAct--
				}
				s.rebuild()
				continue
			}
			if front == 0 {
				return nil, fmt.Errorf("%s: %w: the lines cross behind %s", identName(ident), ErrDiverging, s.names(behind))
			}
			return nil, fmt.Errorf("%s: %w: the lines cross behind %s", identName(ident), ErrBehind, s.names(behind))
		}
		if s.nAct >= 4 {
			if worst, tWorst, eDeg := s.leaveOneOut(lat, lon); worst >= 0 {
				thr := distuv.ChiSquared{K: 1}.Quantile(1 - s.opt.OutlierAlpha)
				if tWorst > thr {
					s.reason[worst] = fmt.Sprintf("outlier: %.1f° (%.1f sigma) off the fix of the other bearings", eDeg, math.Sqrt(tWorst))
					s.drop(worst)
					if s.nAct >= batchOutliers {
						s.dropBatch(lat, lon, thr)
					}
					continue
				}
			}
		}
		break
	}
	return s.finish(ident, lat, lon)
}

func identName(ident string) string {
	if ident == "" {
		return "fix"
	}
	return ident
}

// rebuild recomputes every group's sums from its active members, with the
// reference direction at their weighted circular mean. When all active
// residuals at a point are within ±90°, the circular mean is within ±90° of
// the azimuth to that point too, so each offset δ = wrap(φ − ref) differs from
// the residual by exactly that azimuth's offset and never wraps: the grouped
// cost is then exact.
func (s *solver) rebuild() {
	sc := make([][2]float64, len(s.groups))
	for i, a := range s.active {
		if a {
			g := s.grp[i]
			sc[g][0] += s.w[i] * math.Sin(s.phi[i])
			sc[g][1] += s.w[i] * math.Cos(s.phi[i])
		}
	}
	for k := range s.groups {
		g := &s.groups[k]
		g.ref = math.Atan2(sc[k][0], sc[k][1])
		g.sw, g.swd, g.swd2, g.n = 0, 0, 0, 0
	}
	for i, a := range s.active {
		if a {
			s.add(i, 1)
		}
	}
}

// add puts bearing i into (sign 1) or out of (sign −1) its group's sums.
func (s *solver) add(i int, sign float64) {
	g := &s.groups[s.grp[i]]
	d := wrapPi(s.phi[i] - g.ref)
	g.sw += sign * s.w[i]
	g.swd += sign * s.w[i] * d
	g.swd2 += sign * s.w[i] * d * d
	g.n += int(sign)
	if g.n == 0 {
		g.sw, g.swd, g.swd2 = 0, 0, 0
	}
}

// drop takes one bearing out of the active set.
func (s *solver) drop(i int) {
	s.active[i] = false
	s.nAct--
	s.add(i, -1)
}

// live returns the indices of the groups with active bearings.
func (s *solver) live() []int {
	var out []int
	for k := range s.groups {
		if s.groups[k].n > 0 {
			out = append(out, k)
		}
	}
	return out
}

func (s *solver) rejectNote() string {
	var parts []string
	for i, r := range s.reason {
		if r != "" {
			parts = append(parts, s.lops[i].where()+" "+r)
			if len(parts) == 5 {
				parts = append(parts, "…")
				break
			}
		}
	}
	if len(parts) == 0 {
		return ""
	}
	return "; rejected: " + strings.Join(parts, "; ")
}

// names lists the stations of some bearings for messages, each once, at
// most five.
func (s *solver) names(idx []int) string {
	var parts []string
	seen := map[string]bool{}
	for _, i := range idx {
		w := s.lops[i].where()
		if s.lops[i].Row > 0 {
			w = fmt.Sprintf("station %q", s.lops[i].Station)
		}
		if seen[w] {
			continue
		}
		seen[w] = true
		parts = append(parts, w)
	}
	if len(idx) == 1 {
		return s.lops[idx[0]].where()
	}
	if len(parts) > 5 {
		parts = append(parts[:5], fmt.Sprintf("%d more", len(parts)-5))
	}
	return strings.Join(parts, " and ")
}

// at computes every live group's distance and azimuths to the point.
func (s *solver) at(lat, lon float64) {
	for k := range s.groups {
		g := &s.groups[k]
		if g.n == 0 {
			continue
		}
		d, a1, a2 := Inverse(g.lat, g.lon, lat, lon)
		g.dist, g.azi1, g.azi2 = d, a1*deg, a2*deg
	}
}

// solveSet finds the ML point for the active bearings, or, with three or
// more, the bearings that point away from the best start point (away).
func (s *solver) solveSet() (lat, lon float64, away []int, err error) {
	if err := s.checkCrossing(); err != nil {
		return 0, 0, nil, err
	}
	lat, lon, away, err = s.start()
	if err != nil || len(away) > 0 {
		return 0, 0, away, err
	}
	lat, lon, err = s.gaussNewton(lat, lon, 60)
	if err != nil {
		return 0, 0, nil, err
	}
	s.at(lat, lon)
	near := math.Inf(1)
	for _, k := range s.live() {
		near = math.Min(near, s.groups[k].dist)
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

// widestCrossing returns the largest acute angle (degrees, 0..90) between
// any two of the lines with directions dirs (radians; a line and its
// reverse are the same line), in O(n log n): with the directions reduced
// modulo 180° and sorted, the partner that makes the widest angle with a
// line is the one nearest to it plus 90°.
func widestCrossing(dirs []float64) float64 {
	if len(dirs) < 2 {
		return 0
	}
	a := make([]float64, len(dirs))
	for i, d := range dirs {
		a[i] = math.Mod(math.Mod(d, math.Pi)+math.Pi, math.Pi)
	}
	sort.Float64s(a)
	best := 0.0
	n := len(a)
	for _, x := range a {
		t := math.Mod(x+math.Pi/2, math.Pi)
		j := sort.SearchFloat64s(a, t)
		for _, k := range []int{j - 1, j, j + 1} {
			y := a[((k%n)+n)%n]
			best = math.Max(best, crossDeg(x, y))
		}
	}
	return best
}

// checkCrossing refuses a set whose stations' mean lines never cross at
// MinCrossingDeg or more.
func (s *solver) checkCrossing() error {
	var dirs []float64
	for _, k := range s.live() {
		dirs = append(dirs, s.groups[k].mean())
	}
	if best := widestCrossing(dirs); best < s.opt.MinCrossingDeg {
		return fmt.Errorf("%w: the widest crossing angle is %.1f° (need at least %.1f°); take a bearing from a station off to the side", ErrParallel, best, s.opt.MinCrossingDeg)
	}
	return nil
}

// start returns the Stansfield point from the stations' mean bearings. When
// that lies behind some bearings (possible with a wild bearing among three
// or more) it picks, among the forward crossings of pairs of stations (the
// maxStartStations with the most weight), the one with the least robust
// cost Σ min((r/σ)², 9) over all bearings and returns the bearings that
// point away from it.
func (s *solver) start() (lat, lon float64, away []int, err error) {
	live := s.live()
	g0 := s.groups[live[0]]
	pe0 := make([]float64, len(s.groups))
	pn0 := make([]float64, len(s.groups))
	for _, k := range live {
		pe0[k], pn0[k] = ENU(g0.lat, g0.lon, s.groups[k].lat, s.groups[k].lon)
	}
	d2 := make([]float64, len(s.groups))
	for _, k := range live {
		d2[k] = 1
	}
	var pe, pn float64
	for iter := 0; iter < 4; iter++ {
		var a, b, c, be, bn float64
		for _, k := range live {
			g := &s.groups[k]
			ww := g.sw / d2[k]
			phi := g.mean()
			cs, sn := math.Cos(phi), math.Sin(phi)
			// normal n = (cos φ, −sin φ); n nᵀ = [[c², −cs], [−cs, s²]]
			a += ww * cs * cs
			b += ww * sn * cs
			c += ww * sn * sn
			dot := cs*pe0[k] - sn*pn0[k]
			be += ww * cs * dot
			bn += ww * -sn * dot
		}
		det := a*c - b*b
		if !(det > 0) {
			return 0, 0, nil, fmt.Errorf("%w: the crossing is ill-conditioned", ErrParallel)
		}
		pe = (c*be + b*bn) / det
		pn = (b*be + a*bn) / det
		for _, k := range live {
			d2[k] = math.Max(sq(pe-pe0[k])+sq(pn-pn0[k]), 1)
		}
	}
	behindOf := func(e, n float64) (idx []int) {
		for i, on := range s.active {
			if on {
				k := s.grp[i]
				if math.Sin(s.phi[i])*(e-pe0[k])+math.Cos(s.phi[i])*(n-pn0[k]) < 0 {
					idx = append(idx, i)
				}
			}
		}
		return idx
	}
	behind := behindOf(pe, pn)
	if len(behind) == 0 {
		lat, lon = FromENU(g0.lat, g0.lon, pe, pn)
		return lat, lon, nil, nil
	}
	if len(behind) == s.nAct {
		return 0, 0, nil, fmt.Errorf("%w: the lines cross %.1f km behind the stations", ErrDiverging, math.Sqrt(d2[live[0]])/1e3)
	}
	if s.nAct == 2 {
		return 0, 0, nil, fmt.Errorf("%w: the lines cross behind %s", ErrBehind, s.names(behind))
	}
	// Pairs of stations, the heaviest first.
	cand := append([]int(nil), live...)
	sort.SliceStable(cand, func(x, y int) bool { return s.groups[cand[x]].sw > s.groups[cand[y]].sw })
	if len(cand) > maxStartStations {
		cand = cand[:maxStartStations]
	}
	bestCost := math.Inf(1)
	var bestE, bestN float64
	for x := 0; x < len(cand); x++ {
		for y := x + 1; y < len(cand); y++ {
			gx, gy := cand[x], cand[y]
			e, n, ok := crossing(pe0[gx], pn0[gx], s.groups[gx].mean(), pe0[gy], pn0[gy], s.groups[gy].mean(), s.opt.MinCrossingDeg)
			if !ok {
				continue
			}
			var cost float64
			theta := make(map[int32]float64, len(live))
			for i, on := range s.active {
				if !on {
					continue
				}
				k := s.grp[i]
				th, ok := theta[k]
				if !ok {
					th = math.Atan2(e-pe0[k], n-pn0[k])
					theta[k] = th
				}
				r := wrapPi(s.phi[i] - th)
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
	away = behindOf(bestE, bestN)
	if s.nAct-len(away) < 2 {
		return 0, 0, nil, fmt.Errorf("%w: the lines cross behind %s", ErrBehind, s.names(away))
	}
	lat, lon = FromENU(g0.lat, g0.lon, bestE, bestN)
	return lat, lon, away, nil
}

// maxStartStations bounds the stations whose pairwise crossings are tried as
// robust start points.
const maxStartStations = 24

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
// The Jacobian of the bearing at a station with respect to moving the point
// east/north is (cos α₂, −sin α₂)/s where α₂ is the geodesic's forward
// azimuth at the point and s its length; all bearings of a station share it.
func (s *solver) normal(lat, lon float64) (hee, hen, hnn, ge, gn, cost float64) {
	s.at(lat, lon)
	for k := range s.groups {
		g := &s.groups[k]
		if g.n == 0 {
			continue
		}
		r := wrapPi(g.mean() - g.azi1)
		cost += g.sw*r*r + g.scatter()
		if g.dist < 1e-3 {
			continue
		}
		je, jn := math.Cos(g.azi2)/g.dist, -math.Sin(g.azi2)/g.dist
		hee += g.sw * je * je
		hen += g.sw * je * jn
		hnn += g.sw * jn * jn
		ge += g.sw * je * r
		gn += g.sw * jn * r
	}
	return
}

func (s *solver) cost(lat, lon float64) float64 {
	var c float64
	for k := range s.groups {
		g := &s.groups[k]
		if g.n == 0 {
			continue
		}
		_, a1, _ := Inverse(g.lat, g.lon, lat, lon)
		r := wrapPi(g.mean() - a1*deg)
		c += g.sw*r*r + g.scatter()
	}
	return c
}

// gaussNewton refines a start point; steps are taken with Direct and halved
// until the cost does not grow.
func (s *solver) gaussNewton(lat, lon float64, maxIter int) (float64, float64, error) {
	for it := 0; it < maxIter; it++ {
		s.iters++
		hee, hen, hnn, ge, gn, cost := s.normal(lat, lon)
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
			if s.cost(nl, no) <= cost {
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
// statistic t = e²/(σ² + jᵀ C₋ᵢ j), where e is its residual against the fix
// of the others and C₋ᵢ that fix's covariance; -1 when none can be tested.
// The bearings are ranked first with the statistic linearised at the full
// fix (with r the residual and h = w·jᵀH⁻¹j the leverage, e = r/(1−h) and
// t = w·r²/(1−h), the deletion identities of linear least squares, O(1) per
// bearing); the looCandidates highest are then refitted without themselves
// (two Gauss–Newton steps from the full fix) and ranked by the refitted
// statistic, which the linearised one misjudges when few bearings remain.
// A bearing whose removal would leave no crossing is not a candidate.
func (s *solver) leaveOneOut(lat, lon float64) (worst int, tWorst, eDeg float64) {
	worst = -1
	hee, hen, hnn, _, _, _ := s.normal(lat, lon)
	det := hee*hnn - hen*hen
	if !(det > 0) {
		return -1, 0, 0
	}
	cee, cen, cnn := hnn/det, -hen/det, hee/det
	jcj := make([]float64, len(s.groups))
	for k := range s.groups {
		g := &s.groups[k]
		if g.n == 0 || g.dist < 1e-3 {
			continue
		}
		je, jn := math.Cos(g.azi2)/g.dist, -math.Sin(g.azi2)/g.dist
		jcj[k] = je*je*cee + 2*je*jn*cen + jn*jn*cnn
	}
	type cand struct {
		i int
		t float64
	}
	var top []cand // the looCandidates largest linearised statistics, descending
	for i, on := range s.active {
		if !on {
			continue
		}
		g := &s.groups[s.grp[i]]
		h := s.w[i] * jcj[s.grp[i]]
		t := math.Inf(1) // a bearing that fixes the point alone: refit decides
		if h < 1-1e-9 {
			r := wrapPi(s.phi[i] - g.azi1)
			t = s.w[i] * r * r / (1 - h)
		}
		if len(top) == looCandidates && t <= top[len(top)-1].t {
			continue
		}
		k := sort.Search(len(top), func(x int) bool { return top[x].t < t })
		if len(top) < looCandidates {
			top = append(top, cand{})
		}
		copy(top[k+1:], top[k:])
		top[k] = cand{i, t}
	}
	// Refit without each candidate, in input order as the exact test did.
	sort.Slice(top, func(a, b int) bool { return top[a].i < top[b].i })
	for _, c := range top {
		i := c.i
		s.drop(i)
		t, e, ok := s.refitStat(i, lat, lon)
		s.active[i] = true
		s.nAct++
		s.add(i, 1)
		if ok && t > tWorst {
			worst, tWorst, eDeg = i, t, e*rad
		}
	}
	return worst, tWorst, eDeg
}

// batchOutliers: from this many active bearings on, each outlier pass also
// rejects the other bearings whose linearised statistic exceeds the
// threshold (at most 1 % of the active bearings a pass), since one bearing
// among so many barely moves the fix of the others; one pass per outlier
// would make the solver quadratic.
const batchOutliers = 200

// dropBatch rejects, by the linearised statistic at (lat, lon), the
// bearings beyond thr, worst first, at most 1 % of the active ones.
func (s *solver) dropBatch(lat, lon, thr float64) {
	hee, hen, hnn, _, _, _ := s.normal(lat, lon)
	det := hee*hnn - hen*hen
	if !(det > 0) {
		return
	}
	cee, cen, cnn := hnn/det, -hen/det, hee/det
	type out struct {
		i    int
		t, e float64
	}
	var over []out
	for i, on := range s.active {
		if !on {
			continue
		}
		g := &s.groups[s.grp[i]]
		if g.n < 2 || g.dist < 1e-3 {
			continue // never empty a station here
		}
		je, jn := math.Cos(g.azi2)/g.dist, -math.Sin(g.azi2)/g.dist
		h := s.w[i] * (je*je*cee + 2*je*jn*cen + jn*jn*cnn)
		if !(h < 1-1e-9) {
			continue
		}
		r := wrapPi(s.phi[i] - g.azi1)
		if t := s.w[i] * r * r / (1 - h); t > thr {
			over = append(over, out{i, t, r / (1 - h)})
		}
	}
	sort.Slice(over, func(a, b int) bool { return over[a].t > over[b].t })
	for k, o := range over {
		if k >= s.nAct/100 || s.groups[s.grp[o.i]].n < 2 {
			break
		}
		s.reason[o.i] = fmt.Sprintf("outlier: %.1f° (%.1f sigma) off the fix of the other bearings", o.e*rad, math.Sqrt(o.t))
		s.drop(o.i)
	}
}

// looCandidates is how many bearings leaveOneOut refits without themselves.
const looCandidates = 8

// refitStat is the leave-one-out statistic of bearing i, which is out of
// the active set: the others refitted from (lat, lon) by two Gauss–Newton
// steps, which reach their fix closely enough for a test statistic.
func (s *solver) refitStat(i int, lat, lon float64) (t, e float64, ok bool) {
	if s.checkCrossing() != nil {
		return 0, 0, false
	}
	la, lo, err := s.gaussNewton(lat, lon, 2)
	if err != nil {
		return 0, 0, false
	}
	hee, hen, hnn, _, _, _ := s.normal(la, lo)
	det := hee*hnn - hen*hen
	if !(det > 0) {
		return 0, 0, false
	}
	cee, cen, cnn := hnn/det, -hen/det, hee/det
	g := &s.groups[s.grp[i]]
	d, azi1, azi2 := Inverse(g.lat, g.lon, la, lo)
	e = wrapPi(s.phi[i] - azi1*deg)
	v := 1 / s.w[i]
	if d > 1e-3 {
		a2 := azi2 * deg
		je, jn := math.Cos(a2)/d, -math.Sin(a2)/d
		v += je*je*cee + 2*je*jn*cen + jn*jn*cnn
	}
	return e * e / v, e, true
}

func (s *solver) finish(ident string, lat, lon float64) (*Fix, error) {
	f := &Fix{Ident: ident, Lat: lat, Lon: lon, Iterations: s.iters, VarianceFactor: 1}
	hee, hen, hnn, _, _, cost := s.normal(lat, lon)
	det := hee*hnn - hen*hen
	if !(det > 0) {
		return nil, fmt.Errorf("%s: %w: the information matrix is singular", identName(ident), ErrParallel)
	}
	f.CovEE, f.CovEN, f.CovNN = hnn/det, -hen/det, hee/det
	f.Chi2, f.DOF = cost, s.nAct-2
	if f.DOF >= 1 {
		thr := distuv.ChiSquared{K: float64(f.DOF)}.Quantile(1 - s.opt.OutlierAlpha)
		if f.Chi2 > thr {
			f.VarianceFactor = f.Chi2 / float64(f.DOF)
			f.CovEE *= f.VarianceFactor
			f.CovEN *= f.VarianceFactor
			f.CovNN *= f.VarianceFactor
			msg := fmt.Sprintf("the used bearings disagree more than their sigmas allow (chi-square %.1f with %d dof); ellipse widened by a factor %.1f", f.Chi2, f.DOF, math.Sqrt(f.VarianceFactor))
			if s.nAct == 3 {
				msg += "; with three bearings the wrong one cannot be singled out: take another bearing"
			}
			f.Warnings = append(f.Warnings, msg)
		}
	}
	f.Ellipse = EllipseFromCov(f.CovEE, f.CovEN, f.CovNN, s.opt.Probability)
	f.Ellipse1Sigma = EllipseFromCov(f.CovEE, f.CovEN, f.CovNN, 1-math.Exp(-0.5))
	live := s.live()
	f.Stations = len(live)
	var dirs []float64
	for _, k := range live {
		dirs = append(dirs, s.groups[k].azi2)
	}
	f.CrossingDeg = widestCrossing(dirs)
	if f.CrossingDeg < s.opt.PoorCrossingDeg {
		f.Warnings = append(f.Warnings, fmt.Sprintf("poor crossing: the widest angle between the lines at the fix is %.1f° (below %.0f°), so the fix is uncertain along the bearings (95%%-type ellipse semi-axes %.0f m by %.0f m); add a bearing from a station off to the side",
			f.CrossingDeg, s.opt.PoorCrossingDeg, f.Ellipse.SemiMajorM, f.Ellipse.SemiMinorM))
	}
	f.Bearings = make([]BearingUse, len(s.lops))
	// Distances and azimuths for every station, including those whose
	// bearings were all rejected.
	for k := range s.groups {
		g := &s.groups[k]
		d, a1, a2 := Inverse(g.lat, g.lon, lat, lon)
		g.dist, g.azi1, g.azi2 = d, a1*deg, a2*deg
	}
	for i, l := range s.lops {
		b := BearingUse{LOP: l, Used: s.active[i], Reason: s.reason[i]}
		if k := s.grp[i]; k >= 0 {
			g := &s.groups[k]
			b.DistM = g.dist
			b.ResidualDeg = wrapPi(s.phi[i]-g.azi1) * rad
		}
		if b.Used {
			b.Reason = ""
		}
		f.Bearings[i] = b
	}
	f.cockedHat(s, live)
	return f, nil
}

// cockedHat measures the spread of pairwise crossings of the stations' mean
// lines on the plane at the fix.
func (f *Fix) cockedHat(s *solver, live []int) {
	m := len(live)
	if m < 3 || m > maxHatStations {
		return
	}
	pe, pn, phi := make([]float64, m), make([]float64, m), make([]float64, m)
	for x, k := range live {
		g := &s.groups[k]
		pe[x], pn[x] = ENU(f.Lat, f.Lon, g.lat, g.lon)
		// Plane bearing: the measured bearing turned by the difference between
		// the plane direction and the geodesic azimuth from the station to the fix.
		phi[x] = g.mean()
		if g.dist > 1e-3 {
			phi[x] += wrapPi(math.Atan2(-pe[x], -pn[x]) - g.azi1)
		}
	}
	var xs, ys []float64
	for x := 0; x < m; x++ {
		for y := x + 1; y < m; y++ {
			if e, n, ok := crossing(pe[x], pn[x], phi[x], pe[y], pn[y], phi[y], s.opt.MinCrossingDeg); ok {
				xs, ys = append(xs, e), append(ys, n)
			}
		}
	}
	f.HasCockedHat = true
	for a := range xs {
		for b := a + 1; b < len(xs); b++ {
			f.CockedHatM = math.Max(f.CockedHatM, math.Hypot(xs[a]-xs[b], ys[a]-ys[b]))
		}
	}
	if m == 3 && len(xs) == 3 {
		f.CockedHatAreaM2 = math.Abs((xs[1]-xs[0])*(ys[2]-ys[0])-(xs[2]-xs[0])*(ys[1]-ys[0])) / 2
		f.HasCockedHatArea = true
	}
}
