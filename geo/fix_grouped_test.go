package geo

import (
	"errors"
	"math"
	"math/rand/v2"
	"nullseek/internal/angle"
	"strconv"
	"strings"
	"testing"
)

// stationScenario places an emitter and nst stations around it at 1.5–12 km
// and gives each station per bearings (sigma 1–4°, Gaussian noise). With
// outlier true one bearing in the set is turned by 25–40°.
func stationScenario(rng *rand.Rand, nst, per int, outlier bool) (lops []LOP, lat, lon float64) {
	lat = -60 + 120*rng.Float64()
	lon = -180 + 360*rng.Float64()
	base := 360 * rng.Float64()
	spread := 360 / float64(nst)
	if nst == 2 {
		spread = 90 // two stations facing each other would see along one line
	}
	for s := 0; s < nst; s++ {
		az := base + float64(s)*spread + 30*(rng.Float64()-0.5)
		d := 1500 + 10500*rng.Float64()
		sl, so, _ := Direct(lat, lon, az, d)
		_, b, _ := Inverse(sl, so, lat, lon)
		for k := 0; k < per; k++ {
			sigma := 1 + 3*rng.Float64()
			lops = append(lops, LOP{Ident: "T", Station: "S" + strconv.Itoa(s), Lat: sl, Lon: so,
				BearingDeg: angle.Wrap360(b + sigma*rng.NormFloat64()), SigmaDeg: sigma, Row: len(lops) + 2})
		}
	}
	if outlier {
		i := rng.IntN(len(lops))
		lops[i].BearingDeg = angle.Wrap360(lops[i].BearingDeg + (25+15*rng.Float64())*float64(1-2*rng.IntN(2)))
	}
	return lops, lat, lon
}

// The grouped solver must give the same fix as the per-bearing solver it
// replaced (fix_exact_test.go, the exact implementation: one geodesic per
// bearing and step, the leave-one-out test refitting the others): position
// within 1 mm, the same bearings used, covariance to 1e-5 and chi-square to 1e-6 (the
// solvers stop within 0.1 mm of the minimum).
// The cases: one bearing per station (the old solver's home ground), several
// per station, and sets with a bearing 25–40° off.
func TestFixGroupedEqualsExact(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 13))
	type shape struct{ nst, per int }
	shapes := []shape{{2, 1}, {3, 1}, {4, 1}, {6, 1}, {3, 4}, {4, 6}, {5, 10}, {2, 8}}
	compared, differ := 0, 0
	for trial := 0; trial < 160; trial++ {
		sh := shapes[trial%len(shapes)]
		lops, lat, lon := stationScenario(rng, sh.nst, sh.per, trial%3 == 2 && sh.nst*sh.per >= 4)
		fast, errF := SolveFix(lops, FixOptions{})
		exact, errE := exSolveFix(lops, FixOptions{})
		if (errF == nil) != (errE == nil) && sh.per > 1 {
			// The intended differences, for several bearings per station only:
			// the crossing check and the start point now use the stations'
			// mean lines, where the old ones took the bearings one by one (two
			// bearings of one station "crossing" at that station, one wild
			// bearing dragging the start to where the information matrix is
			// singular or the lines seem to diverge). A fix that only one of
			// them gives must hold the truth, and such sets must stay rare.
			for _, f := range []*Fix{fast, exact} {
				if f != nil && !inside(f, lat, lon, 0.999) {
					t.Errorf("trial %d (%v): grouped %v, exact %v, and the fix misses the truth", trial, sh, errF, errE)
				}
			}
			t.Logf("trial %d (%v): grouped %v; exact %v", trial, sh, errF, errE)
			differ++
			continue
		}
		if (errF == nil) != (errE == nil) {
			t.Fatalf("trial %d (%v): grouped err %v, exact err %v", trial, sh, errF, errE)
		}
		if errF != nil {
			for _, sentinel := range []error{ErrTooFewBearings, ErrParallel, ErrDiverging, ErrBehind, ErrTooFar} {
				if errors.Is(errE, sentinel) != errors.Is(errF, sentinel) {
					if sh.per == 1 {
						t.Errorf("trial %d: grouped %v, exact %v", trial, errF, errE)
					} else {
						t.Logf("trial %d (%v): refused for another reason: grouped %v; exact %v", trial, sh, errF, errE)
						differ++
					}
					break
				}
			}
			continue
		}
		compared++
		onStation := false // a fix on top of a station: its residuals and the covariance are degenerate
		for _, b := range exact.Bearings {
			onStation = onStation || b.DistM < 1
		}
		if d, _, _ := Inverse(fast.Lat, fast.Lon, exact.Lat, exact.Lon); d > 1e-3 && !onStation {
			t.Errorf("trial %d (%v): grouped fix %.3f m from the exact one", trial, sh, d)
		}
		for i := range lops {
			if onStation {
				break
			}
			if fast.Bearings[i].Used != exact.Bearings[i].Used {
				t.Errorf("trial %d (%v): bearing %d used %v (exact %v: %q / %q)", trial, sh, i,
					fast.Bearings[i].Used, exact.Bearings[i].Used, fast.Bearings[i].Reason, exact.Bearings[i].Reason)
			}
			// 1 mm at the fix turns a residual by 1e-3/d rad.
			if r := math.Abs(fast.Bearings[i].ResidualDeg - exact.Bearings[i].ResidualDeg); r > 1e-3/exact.Bearings[i].DistM*rad {
				t.Errorf("trial %d: residual %d differs by %g°", trial, i, r)
			}
		}
		if onStation {
			continue
		}
		scale := math.Sqrt(exact.CovEE * exact.CovNN)
		for _, c := range [][2]float64{{fast.CovEE, exact.CovEE}, {fast.CovEN, exact.CovEN}, {fast.CovNN, exact.CovNN}} {
			if math.Abs(c[0]-c[1]) > 1e-5*scale {
				t.Errorf("trial %d (%v): covariance %g, exact %g", trial, sh, c[0], c[1])
			}
		}
		if math.Abs(fast.Chi2-exact.Chi2) > 1e-6*math.Max(1, exact.Chi2) || fast.DOF != exact.DOF {
			t.Errorf("trial %d: chi2 %v/%d, exact %v/%d", trial, fast.Chi2, fast.DOF, exact.Chi2, exact.DOF)
		}
	}
	if compared < 130 || differ > 5 {
		t.Errorf("%d of 160 trials compared, %d where only one of them gave a fix", compared, differ)
	}
}

// stationCrossing is the widest angle (degrees) between the weighted mean
// bearings of different stations, by all pairs.
func stationCrossing(lops []LOP) float64 {
	type acc struct{ s, c float64 }
	m := map[string]*acc{}
	var order []string
	for _, l := range lops {
		a := m[l.Station]
		if a == nil {
			a = &acc{}
			m[l.Station] = a
			order = append(order, l.Station)
		}
		w := 1 / sq(l.SigmaDeg)
		a.s += w * math.Sin(l.BearingDeg*deg)
		a.c += w * math.Cos(l.BearingDeg*deg)
	}
	var best float64
	for i, x := range order {
		for _, y := range order[i+1:] {
			best = math.Max(best, crossDeg(math.Atan2(m[x].s, m[x].c), math.Atan2(m[y].s, m[y].c)))
		}
	}
	return best
}

// bruteCost is the per-bearing negative log-likelihood Σ wᵢ wrap(φᵢ − azᵢ(p))²
// straight from the exact geodesic azimuth, with no grouping or linearising.
func bruteCost(lops []LOP, lat, lon float64) float64 {
	var c float64
	for _, l := range lops {
		_, az, _ := Inverse(l.Lat, l.Lon, lat, lon)
		r := wrapPi((l.BearingDeg - az) * deg)
		c += r * r / sq(l.SigmaDeg*deg)
	}
	return c
}

// A brute-force ML search (a 41×41 grid of points on the plane at the fix,
// shrunk five times around its best point, the cost evaluated bearing by
// bearing) must find no point better than the fix, and its best point must
// lie within 1 cm of it. Small cases, several bearings per station.
func TestFixBruteForceML(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 5))
	for trial := 0; trial < 12; trial++ {
		lops, _, _ := stationScenario(rng, 3+trial%3, 1+trial%4, false)
		f, err := SolveFix(lops, FixOptions{OutlierAlpha: 1e-12})
		if err != nil {
			t.Fatalf("trial %d: %v", trial, err)
		}
		if len(f.Used()) != len(lops) {
			t.Fatalf("trial %d: %d of %d used", trial, len(f.Used()), len(lops))
		}
		fixCost := bruteCost(lops, f.Lat, f.Lon)
		if math.Abs(fixCost-f.Chi2) > 1e-6*math.Max(1, fixCost) {
			t.Errorf("trial %d: reported chi2 %v, cost at the fix %v", trial, f.Chi2, fixCost)
		}
		ce, cn, half := 0.0, 0.0, 3*f.Ellipse.SemiMajorM
		best := math.Inf(1)
		for round := 0; round < 6; round++ {
			be, bn := ce, cn
			for i := -20; i <= 20; i++ {
				for j := -20; j <= 20; j++ {
					e, n := ce+half*float64(i)/20, cn+half*float64(j)/20
					la, lo := FromENU(f.Lat, f.Lon, e, n)
					if c := bruteCost(lops, la, lo); c < best {
						best, be, bn = c, e, n
					}
				}
			}
			ce, cn, half = be, bn, half/8
		}
		if best < fixCost-1e-9*math.Max(1, fixCost) {
			t.Errorf("trial %d: grid point at (%.3f, %.3f) m has cost %.9f < fix %.9f", trial, ce, cn, best, fixCost)
		}
		if d := math.Hypot(ce, cn); d > 0.01 {
			t.Errorf("trial %d: brute-force minimum %.4f m from the fix", trial, d)
		}
	}
}

// Monte Carlo with several bearings per station: the P=0.95 ellipse must
// hold the truth in 93–97 % of 600 trials and the 1-sigma ellipse in
// 39.3 % ± 6 % (3 binomial sigmas at n=600). The coverage of a bivariate
// normal ellipse is P = 1 − exp(−k²/2) (chi-square with 2 dof, Stansfield
// 1947), so k = √(−2 ln(1−P)).
func TestFixEllipseCoverageGrouped(t *testing.T) {
	rng := rand.New(rand.NewPCG(33, 1947))
	const trials = 600
	in95, in1s := 0, 0
	for k := 0; k < trials; k++ {
		lops, lat, lon := stationScenario(rng, 3+k%3, 5+k%20, false)
		f, err := SolveFix(lops, FixOptions{})
		if err != nil {
			t.Fatalf("trial %d: %v", k, err)
		}
		if inside(f, lat, lon, 0.95) {
			in95++
		}
		if inside(f, lat, lon, 1-math.Exp(-0.5)) {
			in1s++
		}
	}
	p95, p1 := float64(in95)/trials, float64(in1s)/trials
	t.Logf("grouped coverage: 95%% ellipse %.1f%%, 1-sigma ellipse %.1f%%", 100*p95, 100*p1)
	if p95 < 0.93 || p95 > 0.97 {
		t.Errorf("95%% ellipse covered the truth in %.1f%% of trials, want 93–97%%", 100*p95)
	}
	if math.Abs(p1-0.3935) > 0.06 {
		t.Errorf("1-sigma ellipse covered the truth in %.1f%%, want 39.3%% ± 6%%", 100*p1)
	}
}

// Crossing angles, worked examples computed by hand: the acute angle
// between two lines is |Δ| reduced to 0..90° (a line and its reverse are
// one line).
func TestWidestCrossingWorkedExamples(t *testing.T) {
	for _, c := range []struct {
		dirsDeg []float64
		want    float64
	}{
		{[]float64{0, 20}, 20},        // 20°
		{[]float64{10, 100}, 90},      // at right angles
		{[]float64{0, 150}, 30},       // 150° apart = 30° between the lines
		{[]float64{0, 179}, 1},        // nearly the same line
		{[]float64{45, 225}, 0},       // one line, two directions
		{[]float64{0, 60, 100}, 80},   // pairs 60°, 80° (0/100), 40°
		{[]float64{350, 10, 355}, 20}, // across north: 350/10 is 20°
		{[]float64{5}, 0},
	} {
		dirs := make([]float64, len(c.dirsDeg))
		for i, d := range c.dirsDeg {
			dirs[i] = d * deg
		}
		if got := widestCrossing(dirs); math.Abs(got-c.want) > 1e-9 {
			t.Errorf("widestCrossing(%v) = %v, want %v", c.dirsDeg, got, c.want)
		}
	}
	// Against all pairs on random sets.
	rng := rand.New(rand.NewPCG(1, 2))
	for k := 0; k < 200; k++ {
		n := 2 + rng.IntN(30)
		dirs := make([]float64, n)
		for i := range dirs {
			dirs[i] = 2 * math.Pi * rng.Float64()
		}
		var want float64
		for i := range dirs {
			for j := i + 1; j < n; j++ {
				want = math.Max(want, crossDeg(dirs[i], dirs[j]))
			}
		}
		if got := widestCrossing(dirs); math.Abs(got-want) > 1e-9 {
			t.Fatalf("widestCrossing of %d lines = %v, all pairs say %v", n, got, want)
		}
	}
}

// Two stations whose lines meet at the transmitter at 20° (worked example,
// computed by hand: A 1 km south of it looks north, 0°; B 1 km from it on
// azimuth 200° looks at 20°; the lines cross at 20°) get a poor-crossing
// warning naming 20°; at 90° (B due west, looking east) there is none.
func TestFixPoorCrossingWarning(t *testing.T) {
	lat0, lon0 := 0.0, 30.0
	mk := func(bAz float64) []LOP {
		return []LOP{lopAt("A", lat0, lon0, 180, 1000, 0), lopAt("B", lat0, lon0, bAz, 1000, bAz-180)}
	}
	f, err := SolveFix(mk(200), FixOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(f.CrossingDeg-20) > 0.01 {
		t.Errorf("crossing %v°, want 20° (by hand)", f.CrossingDeg)
	}
	w := strings.Join(f.Warnings, "; ")
	if !strings.Contains(w, "poor crossing") || !strings.Contains(w, "20.0°") {
		t.Errorf("no poor-crossing warning at 20°: %q", w)
	}
	f, err = SolveFix(mk(270), FixOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(f.CrossingDeg-90) > 0.01 || strings.Contains(strings.Join(f.Warnings, ";"), "poor crossing") {
		t.Errorf("90° crossing: %v°, warnings %v", f.CrossingDeg, f.Warnings)
	}
	// The threshold is an option: 15° silences the 20° warning.
	f, err = SolveFix(mk(200), FixOptions{PoorCrossingDeg: 15})
	if err != nil || strings.Contains(strings.Join(f.Warnings, ";"), "poor crossing") {
		t.Errorf("PoorCrossingDeg 15: err %v, warnings %v", err, f.Warnings)
	}
}

// A loop at A (two nulls) and one other station B: the choice between
// the nulls rests on B alone, which is said, with the other null. With a
// third station C the same choice is made by two stations: no such warning.
func TestFixAmbiguityResolvedByOneStation(t *testing.T) {
	tLat, tLon := 47.1, 8.2
	mk := func(name string, az, dist float64, amb bool) LOP {
		la, lo, _ := Direct(tLat, tLon, az, dist)
		_, b, _ := Inverse(la, lo, tLat, tLon)
		return LOP{Ident: "L", Station: name, Lat: la, Lon: lo, BearingDeg: angle.Wrap360(b), SigmaDeg: 2, Ambiguous: amb}
	}
	two := []LOP{mk("A", 0, 3000, true), mk("B", 100, 4000, false)}
	f, err := SolveFixAmbiguous(two, FixOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if d, _, _ := Inverse(f.Lat, f.Lon, tLat, tLon); d > 0.01 {
		t.Errorf("fix %.3f m from the truth", d)
	}
	w := strings.Join(f.Warnings, "; ")
	other := angle.Wrap360(two[0].BearingDeg + 180)
	if !strings.Contains(w, "resolved by station B alone") || !strings.Contains(w, strconv.FormatFloat(other, 'f', 1, 64)+"°") {
		t.Errorf("warnings %q lack the one-station note with the other null %.1f°", w, other)
	}
	if len(f.Ambiguities) != 1 || f.Ambiguities[0].Station != "A" || len(f.Ambiguities[0].DecidedBy) != 1 ||
		math.Abs(angle.Diff(f.Ambiguities[0].OtherDeg, other)) > 1e-6 {
		t.Errorf("ambiguities %+v", f.Ambiguities)
	}
	three := append(two, mk("C", 220, 2500, false))
	f, err = SolveFixAmbiguous(three, FixOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if strings.Contains(strings.Join(f.Warnings, ";"), "alone") {
		t.Errorf("three stations: %v", f.Warnings)
	}
	if a := f.Ambiguities; len(a) != 1 || len(a[0].DecidedBy) != 2 || a[0].Other == nil {
		t.Errorf("three stations: ambiguities %+v (want the reversed choice as a candidate fix)", a)
	}
	// Many bearings of one loop, some given the other way round: they turn
	// together, so one station counts once.
	var many []LOP
	for k := 0; k < 40; k++ {
		l := mk("A", 0, 3000, true)
		l.BearingDeg = angle.Wrap360(l.BearingDeg + float64(k%3-1)*0.5 + 180*float64(k%2))
		many = append(many, l)
	}
	many = append(many, mk("B", 100, 4000, false), mk("C", 220, 2500, false))
	f, err = SolveFixAmbiguous(many, FixOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if d, _, _ := Inverse(f.Lat, f.Lon, tLat, tLon); d > 20 || len(f.Used()) != len(many) {
		t.Errorf("40 loop bearings: fix %.1f m from the truth, %d of %d used", d, len(f.Used()), len(many))
	}
}
