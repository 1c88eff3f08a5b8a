package bearing

import (
	"fmt"
	"math"
	"nullseek/internal/angle"
	"sort"
	"strings"
)

// Usage says which readings a fit used and which it left out, and why.
// Readings = Used + KeyUp + BelowNoise + Outliers + Unfitted; Clipped
// readings are part of Used (as lower bounds, see Fit).
type Usage struct {
	// Readings is the number of readings given.
	Readings int
	// Used is the number of readings in the fit (Clipped included).
	Used int
	// Clipped readings were taken with the ADC at its rails: their level is
	// too low by an unknown amount, so the fit uses each as a lower bound on
	// the level (it penalises a fitted level below it, never one above).
	Clipped int
	// KeyUp readings were taken while the carrier was keyed off (the gaps
	// of a keyed carrier): they carry no pattern information and are left out.
	KeyUp int
	// BelowNoise readings lie more than BelowNoiseDB under the noise floor:
	// a receiver cannot see less than its own noise, so they are drop-outs
	// (lost samples, a gain step) and are left out.
	BelowNoise int
	// Outliers are readings the robust fit left out: more than six
	// standard deviations (of noise and fading) from the fitted pattern —
	// a second path's lobe, a burst of interference.
	Outliers int
	// Unfitted readings belong to windows of a long sweep that gave no
	// bearing of their own (Windowed): too short a stretch at the end, a
	// window the antenna did not turn in.
	Unfitted int
}

// String is a short account, e.g. "1190 of 1200 readings (8 clipped, used as lower bounds; 10 key-up left out)".
func (u Usage) String() string {
	s := fmt.Sprintf("%d of %d readings", u.Used, u.Readings)
	var parts []string
	if u.Clipped > 0 {
		parts = append(parts, fmt.Sprintf("%d clipped, used as lower bounds", u.Clipped))
	}
	if u.KeyUp > 0 {
		parts = append(parts, fmt.Sprintf("%d key-up left out", u.KeyUp))
	}
	if u.BelowNoise > 0 {
		parts = append(parts, fmt.Sprintf("%d below the noise left out", u.BelowNoise))
	}
	if u.Outliers > 0 {
		parts = append(parts, fmt.Sprintf("%d far from the pattern left out", u.Outliers))
	}
	if u.Unfitted > 0 {
		parts = append(parts, fmt.Sprintf("%d in windows that gave no bearing", u.Unfitted))
	}
	if len(parts) > 0 {
		s += " (" + strings.Join(parts, "; ") + ")"
	}
	return s
}

// BelowNoiseDB is how far under the noise floor a reading must lie to be
// taken for a drop-out. The power of noise alone averaged over even 20
// complex samples is below −10 dB of its mean with probability 6·10⁻¹⁴
// (its distribution is Gamma(20, 1/20); scipy 1.10 gamma.cdf(0.1, 20,
// scale=1/20) = 6.4e-14); the receiver's readings average more samples.
const BelowNoiseDB = 10.0

// cell is a group of consecutive readings (in time) at nearly the same
// heading: the unit the fit works on.
type cell struct {
	t, h    float64 // mean time (s) and circular-mean heading (degrees)
	n       float64 // readings in the cell
	y       float64 // level, dB on the LevelDB scale (see makeCells)
	clipped bool    // every reading of the cell was clipped: a lower bound
}

// screen sorts out the readings: it returns the usable ones (clipped ones
// included) in time order and counts what was left out. A non-finite
// field is an error.
func screen(points []Point, floorDB *float64) ([]Point, Usage, error) {
	u := Usage{Readings: len(points)}
	pts := make([]Point, 0, len(points))
	for i, q := range points {
		if math.IsNaN(q.HeadingDeg) || math.IsInf(q.HeadingDeg, 0) || math.IsNaN(q.LevelDB) || math.IsInf(q.LevelDB, 0) || math.IsNaN(q.T) || math.IsInf(q.T, 0) {
			return nil, u, fmt.Errorf("%w: point %d has a non-finite field", ErrBadInput, i)
		}
		switch {
		case q.KeyUp:
			u.KeyUp++
		case floorDB != nil && q.LevelDB < *floorDB-BelowNoiseDB && !q.Clipped:
			u.BelowNoise++
		default:
			if q.Clipped {
				u.Clipped++
			}
			pts = append(pts, q)
		}
	}
	sort.SliceStable(pts, func(i, j int) bool { return pts[i].T < pts[j].T })
	u.Used = len(pts)
	return pts, u, nil
}

// makeCells groups time-ordered readings into cells: a new cell starts when
// the heading has moved binDeg from the cell's first reading, when maxDurS
// has passed, after a pause of more than three median reading intervals, or
// when the clipping state changes. Levels are averaged in power
// (thermal, relative to floorDB) or in dB (additive-dB model).
func makeCells(pts []Point, binDeg float64, thermal bool, floorDB float64) []cell {
	if len(pts) == 0 {
		return nil
	}
	// Median reading interval and turning rate set the cell length.
	var dts, rates []float64
	for i := 1; i < len(pts); i++ {
		dt := pts[i].T - pts[i-1].T
		if dt > 0 {
			dts = append(dts, dt)
			rates = append(rates, math.Abs(angle.Wrap180(pts[i].HeadingDeg-pts[i-1].HeadingDeg))/dt)
		}
	}
	medDT, medRate := median(dts), median(rates)
	maxDur := 0.5
	if medRate > 0 {
		maxDur = math.Min(maxDur, binDeg/medRate)
	}
	pause := 3 * medDT
	var cells []cell
	var cur []Point
	flush := func() {
		if len(cur) == 0 {
			return
		}
		var st, sx, sy, sp, sd float64
		for _, q := range cur {
			st += q.T
			s, c := math.Sincos(q.HeadingDeg * math.Pi / 180)
			sx += s
			sy += c
			sp += math.Pow(10, (q.LevelDB-floorDB)/10)
			sd += q.LevelDB
		}
		n := float64(len(cur))
		c := cell{t: st / n, h: angle.Wrap360(math.Atan2(sx, sy) * 180 / math.Pi), n: n, clipped: cur[0].Clipped}
		if thermal {
			c.y = floorDB + 10*math.Log10(sp/n)
		} else {
			c.y = sd / n
		}
		cells = append(cells, c)
		cur = cur[:0]
	}
	for i, q := range pts {
		if len(cur) > 0 {
			f := cur[0]
			if math.Abs(angle.Wrap180(q.HeadingDeg-f.HeadingDeg)) >= binDeg || q.T-f.T >= maxDur ||
				(medDT > 0 && q.T-pts[i-1].T > pause) || q.Clipped != f.Clipped {
				flush()
			}
		}
		cur = append(cur, q)
	}
	flush()
	return cells
}

// median of v (0 for none); v is reordered.
func median(v []float64) float64 {
	if len(v) == 0 {
		return 0
	}
	sort.Float64s(v)
	n := len(v)
	if n%2 == 1 {
		return v[n/2]
	}
	return (v[n/2-1] + v[n/2]) / 2
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

// Arc is a covered stretch of headings, clockwise from FromDeg to ToDeg
// (degrees in [0, 360); ToDeg < FromDeg when it crosses north).
type Arc struct{ FromDeg, ToDeg float64 }

// arcs turns the gaps of coverage into the covered arcs, clockwise from
// the first after north.
func arcs(gaps [][2]float64) []Arc {
	if len(gaps) == 0 {
		return []Arc{{0, 360}}
	}
	var out []Arc
	for i, g := range gaps {
		next := gaps[(i+1)%len(gaps)]
		out = append(out, Arc{FromDeg: angle.Wrap360(g[0] + g[1]), ToDeg: next[0]})
	}
	sort.Slice(out, func(i, j int) bool { return out[i].FromDeg < out[j].FromDeg })
	return out
}

// FormatArcs writes covered arcs as "35°–175°, 200°–210°" ("all round" for
// the whole circle).
func FormatArcs(a []Arc) string {
	if len(a) == 1 && a[0].FromDeg == 0 && a[0].ToDeg == 360 {
		return "all round"
	}
	var s []string
	for _, x := range a {
		s = append(s, fmt.Sprintf("%.0f°–%.0f°", x.FromDeg, x.ToDeg))
	}
	return strings.Join(s, ", ")
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
