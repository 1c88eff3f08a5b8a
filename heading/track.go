package heading

import (
	"errors"
	"fmt"
	"math"
	"nullseek/internal/angle"
	"sort"
)

// Ref names the north a heading is measured from. It is angle.North, so
// that headings and the bearings files share one word and one parser.
type Ref = angle.North

const (
	// True: degrees clockwise from geographic (true) north. The zero value,
	// matching the project convention that bearings are true unless a name
	// says otherwise.
	True = angle.TrueNorth
	// Magnetic: degrees clockwise from magnetic north; convert with
	// Track.ToTrue and the declination (east positive) at the station.
	Magnetic = angle.MagneticNorth
)

// ParseRef reads a heading reference as people write it in flags and
// station files: "true" or "magnetic", in any case, and nothing else. It
// is angle.ParseNorth, the one parser of the word; callers add the flag
// or key to the error.
func ParseRef(s string) (Ref, error) { return angle.ParseNorth(s) }

// Sample is one heading observation.
type Sample struct {
	// T is the time of the observation in seconds from the capture start
	// (may be negative for headings logged before the capture began).
	T float64
	// Deg is the heading in degrees clockwise from north, in [0, 360).
	Deg float64
}

// DefaultMaxGapS is the longest interval between two heading samples, in
// seconds, across which Track.At still interpolates when Track.MaxGapS is 0.
// Two seconds covers a 1 Hz compass that drops one sentence; at a typical
// hand-turning rate of 20–30 °/s a longer hole hides tens of degrees of
// unknown motion, so a level sample falling in it is better discarded.
const DefaultMaxGapS = 2.0

// DefaultReversalDeg is the hysteresis, in degrees, that Track.Sweeps
// requires before it calls a change of turning direction a reversal when
// Track.ReversalDeg is 0. It keeps compass jitter of a few tenths of a
// degree from splitting a sweep.
const DefaultReversalDeg = 1.0

// Track is a time series of antenna headings with interpolation.
//
// Samples must be in strictly increasing T with Deg in [0, 360) (see
// Validate); every constructor in this package guarantees that. Treat
// Samples as immutable once the Track is in use: WithLag and WithOffset
// return copies that share the slice.
//
// Interpolation between two neighbouring samples takes the shorter way
// round the circle (350° → 10° passes through 0°, 10° → 350° turns
// counter-clockwise), which is exact as long as the antenna turns less than
// 180° between samples. At ≥ 10 Hz that holds below 1800 °/s.
type Track struct {
	// Ref is the north Samples are measured from.
	Ref Ref
	// Samples are the raw observations, in sensor time and sensor degrees.
	Samples []Sample
	// MountOffsetDeg is the fixed angle, in degrees, from the heading
	// sensor's reference direction to the antenna's reference direction
	// (the main lobe or the null): At adds it to the interpolated heading.
	MountOffsetDeg float64
	// LagS is how late the heading log is, in seconds (the package's lag
	// convention): a sample stamped T describes the antenna at capture
	// time T − LagS, so At(t) reads the samples at t + LagS (logTime and
	// captureTime apply it). Positive for a compass that reports late.
	LagS float64
	// MaxGapS is the longest interval between samples, in seconds, across
	// which At interpolates; 0 means DefaultMaxGapS, a negative value means
	// no limit.
	MaxGapS float64
	// ReversalDeg is the hysteresis for Sweeps in degrees; 0 means
	// DefaultReversalDeg.
	ReversalDeg float64
}

// Direction is the sense of an antenna turn.
type Direction int

const (
	// CW is clockwise (heading increasing, through 359° → 0°).
	CW Direction = 1
	// CCW is counter-clockwise (heading decreasing, through 0° → 359°).
	CCW Direction = -1
)

// String returns "cw" or "ccw".
func (d Direction) String() string {
	switch d {
	case CW:
		return "cw"
	case CCW:
		return "ccw"
	}
	return fmt.Sprintf("Direction(%d)", int(d))
}

// Sweep is one run of a track turning in a single direction.
type Sweep struct {
	// StartS and EndS are capture times in seconds (LagS applied).
	StartS, EndS float64
	// Dir is the turning sense.
	Dir Direction
	// StartDeg and EndDeg are the antenna headings at the ends of the
	// sweep in [0, 360) (MountOffsetDeg applied).
	StartDeg, EndDeg float64
	// TurnDeg is the signed angle turned, positive clockwise; it may exceed
	// 360 in magnitude for a sweep that goes round more than once.
	TurnDeg float64
}

// Gap is an interval between two consecutive samples longer than a limit.
type Gap struct {
	// StartS and EndS are the capture times, in seconds (LagS applied), of
	// the samples on either side of the hole.
	StartS, EndS float64
}

func (t *Track) maxGap() float64 {
	switch {
	case t.MaxGapS == 0:
		return DefaultMaxGapS
	case t.MaxGapS < 0:
		return math.Inf(1)
	}
	return t.MaxGapS
}

func (t *Track) reversal() float64 {
	if t.ReversalDeg <= 0 {
		return DefaultReversalDeg
	}
	return t.ReversalDeg
}

// Validate reports the first sample that breaks the Track invariants:
// finite strictly increasing T, finite Deg in [0, 360), known Ref and
// finite MountOffsetDeg and LagS.
func (t *Track) Validate() error {
	if t == nil {
		return errors.New("heading track is nil")
	}
	if t.Ref != True && t.Ref != Magnetic {
		return fmt.Errorf("heading track has unknown reference %d", int(t.Ref))
	}
	if !finite(t.MountOffsetDeg) || !finite(t.LagS) || math.IsNaN(t.MaxGapS) {
		return errors.New("heading track has a non-finite mount offset, lag or max gap")
	}
	for i, s := range t.Samples {
		if !finite(s.T) {
			return fmt.Errorf("heading sample %d: time %v is not finite", i, s.T)
		}
		if !finite(s.Deg) || s.Deg < 0 || s.Deg >= 360 {
			return fmt.Errorf("heading sample %d at %.3f s: %v° is outside [0, 360)", i, s.T, s.Deg)
		}
		if i > 0 && s.T <= t.Samples[i-1].T {
			return fmt.Errorf("heading sample %d at %.3f s is not after the previous one at %.3f s", i, s.T, t.Samples[i-1].T)
		}
	}
	return nil
}

// locate returns i such that Samples[i].T <= ts < Samples[i+1].T, or
// i = len-1 when ts equals the last stamp; ok is false outside the track.
func (t *Track) locate(ts float64) (int, bool) {
	n := len(t.Samples)
	if n == 0 || !(ts >= t.Samples[0].T) || ts > t.Samples[n-1].T {
		return 0, false
	}
	// first index with T > ts, minus one
	i := sort.Search(n, func(k int) bool { return t.Samples[k].T > ts }) - 1
	return i, true
}

// rawAt interpolates the stored samples at sensor time ts, without lag or
// mount offset. The result is unwrapped relative to Samples[i].Deg.
func (t *Track) rawAt(ts float64) (deg float64, i int, ok bool) {
	i, ok = t.locate(ts)
	if !ok {
		return 0, 0, false
	}
	a := t.Samples[i]
	if ts == a.T || i == len(t.Samples)-1 {
		return a.Deg, i, true
	}
	b := t.Samples[i+1]
	dt := b.T - a.T
	if dt > t.maxGap() {
		return 0, i, false
	}
	f := (ts - a.T) / dt
	return a.Deg + f*angle.Diff(a.Deg, b.Deg), i, true
}

// At returns the antenna heading in degrees [0, 360) at capture time tS
// seconds: the samples interpolated at tS + LagS (shorter way round between
// neighbours) plus MountOffsetDeg. ok is false before the first or after
// the last sample, inside a hole between samples longer than the max gap
// (MaxGapS, default DefaultMaxGapS), and for NaN tS. Exactly on a sample it
// returns that sample whatever the gaps beside it.
func (t *Track) At(tS float64) (deg float64, ok bool) {
	d, _, ok := t.rawAt(t.logTime(tS))
	if !ok {
		return 0, false
	}
	return angle.Wrap360(d + t.MountOffsetDeg), true
}

// Span returns the capture times, in seconds, of the first and last sample
// (LagS applied): At can answer only inside [start, end]. An empty track
// returns (0, 0).
func (t *Track) Span() (start, end float64) {
	if len(t.Samples) == 0 {
		return 0, 0
	}
	return t.captureTime(t.Samples[0].T), t.captureTime(t.Samples[len(t.Samples)-1].T)
}

// Gaps lists the holes between consecutive samples longer than maxGapS
// seconds (maxGapS <= 0 uses the track's own max gap), in capture time.
func (t *Track) Gaps(maxGapS float64) []Gap {
	lim := maxGapS
	if !(lim > 0) {
		lim = t.maxGap()
	}
	var gaps []Gap
	for i := 1; i < len(t.Samples); i++ {
		if t.Samples[i].T-t.Samples[i-1].T > lim {
			gaps = append(gaps, Gap{StartS: t.captureTime(t.Samples[i-1].T), EndS: t.captureTime(t.Samples[i].T)})
		}
	}
	return gaps
}

// Coverage returns how many degrees of the circle, in [0, 360], the antenna
// pointed at during capture times [start, end] seconds: the measure of the
// union of the arcs swept between samples, each arc taken the shorter way.
// Holes longer than the max gap contribute nothing (the motion there is
// unknown). It returns 0 for an empty or inverted interval.
func (t *Track) Coverage(start, end float64) float64 {
	if !(end > start) || len(t.Samples) < 2 {
		return 0
	}
	s, e := t.logTime(start), t.logTime(end)
	var arcs [][2]float64 // [lo, hi) on [0, 360)
	addArc := func(a, delta float64) {
		lo := a
		if delta < 0 {
			lo, delta = a+delta, -delta
		}
		if delta >= 360 {
			arcs = append(arcs, [2]float64{0, 360})
			return
		}
		lo = angle.Wrap360(lo)
		hi := lo + delta
		if hi > 360 {
			arcs = append(arcs, [2]float64{lo, 360}, [2]float64{0, hi - 360})
		} else {
			arcs = append(arcs, [2]float64{lo, hi})
		}
	}
	lim := t.maxGap()
	for i := 0; i+1 < len(t.Samples); i++ {
		a, b := t.Samples[i], t.Samples[i+1]
		if b.T <= s || a.T >= e || b.T-a.T > lim {
			continue
		}
		d := angle.Diff(a.Deg, b.Deg)
		f0, f1 := 0.0, 1.0
		if a.T < s {
			f0 = (s - a.T) / (b.T - a.T)
		}
		if b.T > e {
			f1 = (e - a.T) / (b.T - a.T)
		}
		addArc(a.Deg+f0*d, (f1-f0)*d)
	}
	if len(arcs) == 0 {
		return 0
	}
	sort.Slice(arcs, func(i, j int) bool { return arcs[i][0] < arcs[j][0] })
	total := 0.0
	cur := arcs[0]
	for _, a := range arcs[1:] {
		if a[0] <= cur[1] {
			cur[1] = math.Max(cur[1], a[1])
			continue
		}
		total += cur[1] - cur[0]
		cur = a
	}
	total += cur[1] - cur[0]
	return math.Min(total, 360)
}

// Sweeps splits the track into runs of one turning direction. A run ends
// where the heading has come back from its furthest point by at least the
// reversal hysteresis (ReversalDeg, default DefaultReversalDeg) or at a hole
// longer than the max gap; the furthest point is the end of one sweep and
// the start of the next. Pauses belong to the sweep they interrupt. A
// stretch that never moves more than the hysteresis yields no sweep.
func (t *Track) Sweeps() []Sweep {
	var out []Sweep
	n := len(t.Samples)
	if n < 2 {
		return out
	}
	hyst := t.reversal()
	lim := t.maxGap()
	u := make([]float64, n) // unwrapped, restarted at each gap
	u[0] = t.Samples[0].Deg
	segStart, ext, loIdx, hiIdx := 0, 0, 0, 0
	var dir Direction
	emit := func(from, to int) {
		out = append(out, Sweep{
			StartS:   t.captureTime(t.Samples[from].T),
			EndS:     t.captureTime(t.Samples[to].T),
			Dir:      dir,
			StartDeg: angle.Wrap360(t.Samples[from].Deg + t.MountOffsetDeg),
			EndDeg:   angle.Wrap360(t.Samples[to].Deg + t.MountOffsetDeg),
			TurnDeg:  u[to] - u[from],
		})
	}
	for i := 1; i < n; i++ {
		if t.Samples[i].T-t.Samples[i-1].T > lim {
			if dir != 0 {
				emit(segStart, ext)
			}
			u[i] = t.Samples[i].Deg
			segStart, ext, loIdx, hiIdx, dir = i, i, i, i, 0
			continue
		}
		u[i] = u[i-1] + angle.Diff(t.Samples[i-1].Deg, t.Samples[i].Deg)
		if dir == 0 {
			// undecided: follow both extremes; once they are a hysteresis
			// apart, the later one gives the direction and the earlier one
			// the sweep's start
			if u[i] > u[hiIdx] {
				hiIdx = i
			}
			if u[i] < u[loIdx] {
				loIdx = i
			}
			if u[hiIdx]-u[loIdx] >= hyst {
				if hiIdx == i {
					dir, segStart = CW, loIdx
				} else {
					dir, segStart = CCW, hiIdx
				}
				ext = i
			}
			continue
		}
		f := float64(dir)
		if (u[i]-u[ext])*f > 0 {
			ext = i
		} else if (u[ext]-u[i])*f >= hyst {
			emit(segStart, ext)
			segStart, dir = ext, -dir
			ext = i
		}
	}
	if dir != 0 {
		emit(segStart, ext)
	}
	return out
}

// ToTrue converts a magnetic track to true north by adding declDeg, the
// magnetic declination in degrees, east positive (WMM convention: true =
// magnetic + D). A track that is already True is returned as an unchanged
// copy, so calling ToTrue twice never applies the declination twice. The
// copy owns new Samples.
func (t *Track) ToTrue(declDeg float64) *Track {
	c := *t
	c.Samples = make([]Sample, len(t.Samples))
	copy(c.Samples, t.Samples)
	if t.Ref == True {
		return &c
	}
	for i := range c.Samples {
		c.Samples[i].Deg = angle.Wrap360(c.Samples[i].Deg + declDeg)
	}
	c.Ref = True
	return &c
}

// logTime is the log time whose sample describes the antenna at capture
// time tS: tS + LagS. With captureTime, its inverse, it is the one place
// the lag convention is applied.
func (t *Track) logTime(tS float64) float64 { return tS + t.LagS }

// captureTime is the capture time a sample stamped logT describes:
// logT − LagS.
func (t *Track) captureTime(logT float64) float64 { return logT - t.LagS }

// WithLag returns a copy of the track with LagS set to lagS seconds
// (replacing, not adding to, the current lag; the package's lag
// convention: positive when the log is late, as bearing.EstimateLag
// measures it). It shares Samples, so it is
// cheap enough to call once per candidate lag in a search.
func (t *Track) WithLag(lagS float64) *Track {
	c := *t
	c.LagS = lagS
	return &c
}

// WithOffset returns a copy of the track with MountOffsetDeg set to deg
// (replacing the current offset). It shares Samples.
func (t *Track) WithOffset(deg float64) *Track {
	c := *t
	c.MountOffsetDeg = deg
	return &c
}
