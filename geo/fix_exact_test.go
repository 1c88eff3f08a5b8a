package geo

// The per-bearing fix solver as it was before bearings were grouped per
// station (every bearing its own geodesic in every Gauss–Newton step, the
// leave-one-out test refitting the others, the crossing check over all
// pairs). It is kept here, unchanged but for names, as the exact reference
// that the grouped solver in fix.go must reproduce.

import (
	"fmt"
	"math"
	"strings"

	"gonum.org/v1/gonum/stat/distuv"
)

// exSolver carries the LOPs in radians.
type exSolver struct {
	lops   []LOP
	phi    []float64 // measured bearing, rad
	w      []float64 // 1/σ², rad⁻²
	opt    FixOptions
	iters  int
	reason []string
}

// exSolveFix computes the maximum-likelihood position of one transmitter from
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
func exSolveFix(lops []LOP, opt FixOptions) (*Fix, error) {
	s := &exSolver{lops: lops, opt: opt.withDefaults()}
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
			return nil, fmt.Errorf("%s: %w (%d given, %d usable)%s", exIdentName(ident), ErrTooFewBearings, n, len(active), s.rejectNote())
		}
		var err error
		var away []int
		lat, lon, away, err = s.solveSet(active)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", exIdentName(ident), err)
		}
		if len(away) > 0 {
			for _, i := range away {
				s.reason[i] = "points away from where the other bearings cross"
				active = exRemove(active, i)
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
				return nil, fmt.Errorf("%s: %w: the lines cross behind %s", exIdentName(ident), ErrDiverging, s.names(behind))
			}
			return nil, fmt.Errorf("%s: %w: the lines cross behind %s", exIdentName(ident), ErrBehind, s.names(behind))
		}
		if len(active) >= 4 {
			if worst, tWorst, eDeg := s.leaveOneOut(active, lat, lon); worst >= 0 {
				thr := distuv.ChiSquared{K: 1}.Quantile(1 - s.opt.OutlierAlpha)
				if tWorst > thr {
					s.reason[worst] = fmt.Sprintf("outlier: %.1f° (%.1f sigma) off the fix of the other bearings", eDeg, math.Sqrt(tWorst))
					active = exRemove(active, worst)
					continue
				}
			}
		}
		break
	}
	return s.finish(ident, active, lat, lon)
}

func exIdentName(ident string) string {
	if ident == "" {
		return "fix"
	}
	return ident
}

func (s *exSolver) rejectNote() string {
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

func (s *exSolver) names(idx []int) string {
	parts := make([]string, len(idx))
	for k, i := range idx {
		parts[k] = s.lops[i].where()
	}
	return strings.Join(parts, " and ")
}

func exRemove(a []int, v int) []int {
	out := make([]int, 0, len(a))
	for _, x := range a {
		if x != v {
			out = append(out, x)
		}
	}
	return out
}

// residual is measured − predicted bearing (rad, wrapped) of LOP i at a point.
func (s *exSolver) residual(i int, lat, lon float64) float64 {
	l := s.lops[i]
	_, azi1, _ := Inverse(l.Lat, l.Lon, lat, lon)
	return wrapPi(s.phi[i] - azi1*deg)
}

// solveSet finds the ML point for the active bearings, or, with three or
// more, the bearings that point away from the best start point (away).
func (s *exSolver) solveSet(active []int) (lat, lon float64, away []int, err error) {
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

// exCrossDeg is the acute angle (degrees, 0..90) between two bearings' lines.
func exCrossDeg(a, b float64) float64 {
	return math.Asin(math.Min(1, math.Abs(math.Sin(a-b)))) * rad
}

func (s *exSolver) checkCrossing(active []int) error {
	best := 0.0
	for x, i := range active {
		for _, j := range active[x+1:] {
			best = math.Max(best, exCrossDeg(s.phi[i], s.phi[j]))
		}
	}
	if best < s.opt.MinCrossingDeg {
		return fmt.Errorf("%w: the widest exCrossing angle is %.1f° (need at least %.1f°); take a bearing from a station off to the side", ErrParallel, best, s.opt.MinCrossingDeg)
	}
	return nil
}

// exPlane holds the active stations on a tangent plane.
type exPlane struct {
	lat0, lon0 float64
	e, n       []float64
}

func (s *exSolver) exPlane(active []int, lat0, lon0 float64) exPlane {
	p := exPlane{lat0: lat0, lon0: lon0, e: make([]float64, len(active)), n: make([]float64, len(active))}
	for k, i := range active {
		p.e[k], p.n[k] = ENU(lat0, lon0, s.lops[i].Lat, s.lops[i].Lon)
	}
	return p
}

// start returns the Stansfield point. When that lies behind some stations
// (possible with a wild bearing among three or more) it picks, among the
// forward pairwise crossings, the one with the least robust cost
// Σ min((r/σ)², 9) and returns the bearings that point away from it.
func (s *exSolver) start(active []int) (lat, lon float64, away []int, err error) {
	i0 := active[0]
	pl := s.exPlane(active, s.lops[i0].Lat, s.lops[i0].Lon)
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
			return 0, 0, nil, fmt.Errorf("%w: the exCrossing is ill-conditioned", ErrParallel)
		}
		pe = (c*be + b*bn) / det
		pn = (b*be + a*bn) / det
		for k := range d2 {
			d2[k] = math.Max(exSq(pe-pl.e[k])+exSq(pn-pl.n[k]), 1)
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
			e, n, ok := exCrossing(pl.e[x], pl.n[x], s.phi[active[x]], pl.e[y], pl.n[y], s.phi[active[y]], s.opt.MinCrossingDeg)
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

// exCrossing intersects two rays on a plane (station, bearing in rad) and
// reports whether they meet in front of both at an angle ≥ minDeg.
func exCrossing(e1, n1, phi1, e2, n2, phi2, minDeg float64) (e, n float64, ok bool) {
	if exCrossDeg(phi1, phi2) < minDeg {
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

func exSq(x float64) float64 { return x * x }

// normal accumulates the Gauss–Newton normal equations at a point: the
// information matrix H (m⁻²), the gradient g (m⁻¹·rad) and the cost Σwr².
// The Jacobian of the bearing at station i with respect to moving the point
// east/north is (cos α₂, −sin α₂)/s where α₂ is the geodesic's forward
// azimuth at the point and s its length.
func (s *exSolver) normal(active []int, lat, lon float64) (hee, hen, hnn, ge, gn, cost float64) {
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

func (s *exSolver) cost(active []int, lat, lon float64) float64 {
	var c float64
	for _, i := range active {
		r := s.residual(i, lat, lon)
		c += s.w[i] * r * r
	}
	return c
}

// gaussNewton refines a start point; steps are taken with Direct and halved
// until the cost does not grow.
func (s *exSolver) gaussNewton(active []int, lat, lon float64, maxIter int) (float64, float64, error) {
	for it := 0; it < maxIter; it++ {
		s.iters++
		hee, hen, hnn, ge, gn, cost := s.normal(active, lat, lon)
		det := hee*hnn - hen*hen
		if !(det > 0) || det < 1e-30*exSq(hee+hnn) {
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
func (s *exSolver) leaveOneOut(active []int, lat, lon float64) (worst int, tWorst, eDeg float64) {
	worst = -1
	for _, i := range active {
		others := exRemove(active, i)
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

func (s *exSolver) finish(ident string, active []int, lat, lon float64) (*Fix, error) {
	f := &Fix{Ident: ident, Lat: lat, Lon: lon, Iterations: s.iters, VarianceFactor: 1}
	hee, hen, hnn, _, _, cost := s.normal(active, lat, lon)
	det := hee*hnn - hen*hen
	if !(det > 0) {
		return nil, fmt.Errorf("%s: %w: the information matrix is singular", exIdentName(ident), ErrParallel)
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
	f.exCockedHat(active, s)
	return f, nil
}

// exCockedHat measures the spread of pairwise crossings on the plane at the fix.
func (f *Fix) exCockedHat(active []int, s *exSolver) {
	if len(active) < 3 {
		return
	}
	pl := s.exPlane(active, f.Lat, f.Lon)
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
			if e, n, ok := exCrossing(pl.e[x], pl.n[x], phi[x], pl.e[y], pl.n[y], phi[y], s.opt.MinCrossingDeg); ok {
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
