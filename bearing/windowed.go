package bearing

import (
	"fmt"
	"math"
	"strings"
)

// DefaultWindowS is the span of one window of a long sweep (Windowed): two
// minutes hold two turns of a rotator turning 6°/s and ten of a hand
// turning 30°/s, and about 24,000 readings at the receiver's 200 a second.
const DefaultWindowS = 120.0

// MaxPlotPoints bounds the readings a Windowed keeps for a picture.
const MaxPlotPoints = 6000

// Windowed fits a sweep of any length with bounded memory: readings are
// added in time order, each window of WindowS seconds is fitted on its own
// as soon as it is full (Fit), and Finish combines the windows' bearings
// (Combine). A sweep no longer than one window gives exactly Fit's answer.
// It keeps at most MaxPlotPoints readings (evenly thinned) for plots.
type Windowed struct {
	p       Pattern
	opts    FitOptions
	windowS float64

	buf          []Point
	bufStart     float64
	floorSum     float64
	floorN       int
	ests         []Estimate
	errs         []error
	usage        Usage
	plot         []Point
	stride, skip int
	lastT        float64
	started      bool
	counts       []int // readings per window
}

// NewWindowed prepares a windowed fit with pattern p; windowS ≤ 0 means
// DefaultWindowS (range up to 86400 s). opts.NoiseFloorDB is ignored: each
// Add brings the floor of its readings.
func NewWindowed(p Pattern, opts FitOptions, windowS float64) (*Windowed, error) {
	if err := p.Validate(); err != nil {
		return nil, fmt.Errorf("windowed fit: %w: %w", ErrBadInput, err)
	}
	if err := opts.Validate(); err != nil {
		return nil, fmt.Errorf("windowed fit: %w", err)
	}
	if math.IsNaN(windowS) || math.IsInf(windowS, 0) || windowS > 86400 {
		return nil, fmt.Errorf("windowed fit: %w: window %v s out of range (0, 86400]", ErrBadInput, windowS)
	}
	if windowS <= 0 {
		windowS = DefaultWindowS
	}
	opts.NoiseFloorDB = nil
	return &Windowed{p: p, opts: opts, windowS: windowS, stride: 1}, nil
}

// Add appends readings (in time order, after those added before) whose
// noise floor is floorDB (nil: no floor, the additive-dB model). Readings
// not later than the last one added are skipped, so overlapping stretches
// can be added as they come.
func (w *Windowed) Add(pts []Point, floorDB *float64) {
	for _, q := range pts {
		if w.started && !(q.T > w.lastT) {
			continue
		}
		if !w.started || len(w.buf) == 0 {
			w.bufStart = q.T
		}
		w.started = true
		w.lastT = q.T
		if len(w.buf) > 0 && q.T-w.bufStart >= w.windowS {
			w.flush()
			w.bufStart = q.T
		}
		w.buf = append(w.buf, q)
		if floorDB != nil {
			w.floorSum += *floorDB
			w.floorN++
		}
		// thinned copy for plots
		if w.skip == 0 {
			w.plot = append(w.plot, q)
			if len(w.plot) >= MaxPlotPoints {
				half := w.plot[:0]
				for i := 0; i < len(w.plot); i += 2 {
					half = append(half, w.plot[i])
				}
				w.plot = half
				w.stride *= 2
			}
		}
		w.skip = (w.skip + 1) % w.stride
	}
}

// flush fits the window in the buffer.
func (w *Windowed) flush() {
	if len(w.buf) == 0 {
		return
	}
	o := w.opts
	if w.floorN > 0 {
		f := w.floorSum / float64(w.floorN)
		o.NoiseFloorDB = &f
	}
	e, err := Fit(w.buf, w.p, o)
	w.ests = append(w.ests, e)
	w.errs = append(w.errs, err)
	w.counts = append(w.counts, len(w.buf))
	w.buf = w.buf[:0]
	w.floorSum, w.floorN = 0, 0
}

// PlotPoints are the readings kept for a picture (all of them, or an even
// thinning to at most MaxPlotPoints).
func (w *Windowed) PlotPoints() []Point { return w.plot }

// Finish fits what is left and returns the sweep's bearing: the one
// window's estimate, or, for several, their combination (Combine) as an
// Estimate whose sigmas are the combination's, whose Usage and flags add
// up those of the windows, and whose warnings say how many windows were
// combined and which were left out. A last window too short to fit is
// dropped when an earlier one fitted (its readings count as left out).
func (w *Windowed) Finish() (Estimate, error) {
	w.flush()
	var good []Estimate
	var firstErr error
	for i, e := range w.ests {
		if w.errs[i] != nil {
			if firstErr == nil {
				firstErr = w.errs[i]
			}
			continue
		}
		good = append(good, e)
	}
	switch {
	case len(w.ests) == 0:
		return Estimate{}, fmt.Errorf("fit bearing: %w: no readings", ErrTooFewPoints)
	case len(good) == 0:
		return Estimate{}, firstErr
	case len(w.ests) == 1:
		return good[0], nil
	case len(good) == 1:
		e := good[0]
		for i, err := range w.errs {
			if err != nil {
				e.Usage.Readings += w.counts[i]
				e.Usage.Unfitted += w.counts[i]
			}
		}
		e.Warnings = append(e.Warnings, fmt.Sprintf("long sweep: 1 of %d windows of %.0f s gave a bearing; the others: %v", len(w.ests), w.windowS, firstErr))
		return e, nil
	}
	c, err := Combine(good, CombineOptions{})
	if err != nil {
		return Estimate{}, fmt.Errorf("fit bearing: %w", err)
	}
	out := Estimate{BearingDeg: c.BearingDeg, SigmaDeg: c.SigmaDeg, AltBearingDeg: c.AltBearingDeg,
		ModelSigmaDeg: c.SigmaDeg, FisherSigmaDeg: c.SigmaDeg, Mode: w.p.Mode, Noise: good[0].Noise}
	used := map[int]bool{}
	for _, i := range c.Used {
		used[i] = true
	}
	var levelSum, floorSum, resid2, fadSum float64
	for i, e := range good {
		out.Usage.Readings += e.Usage.Readings
		if !used[i] {
			out.Usage.Outliers += e.Usage.Used
			continue
		}
		u := e.Usage
		out.Usage.Used += u.Used
		out.Usage.Clipped += u.Clipped
		out.Usage.KeyUp += u.KeyUp
		out.Usage.BelowNoise += u.BelowNoise
		out.Usage.Outliers += u.Outliers
		out.CoverageDeg = math.Max(out.CoverageDeg, e.CoverageDeg)
		if e.CoverageDeg >= out.CoverageDeg {
			out.Arcs = e.Arcs
		}
		out.NullDepthDB = math.Max(out.NullDepthDB, e.NullDepthDB)
		out.CorrelatedSigmaDeg = math.Max(out.CorrelatedSigmaDeg, e.CorrelatedSigmaDeg)
		levelSum += e.LevelDB
		floorSum += e.NoiseFloorDB
		resid2 += e.ResidualDB * e.ResidualDB
		fadSum += e.FadingDB
		out.FadingTimeS = math.Max(out.FadingTimeS, e.FadingTimeS)
		for _, f := range e.Flags {
			if !out.HasFlag(f) {
				out.Flags = append(out.Flags, f)
			}
		}
	}
	n := float64(len(c.Used))
	out.LevelDB, out.NoiseFloorDB = levelSum/n, floorSum/n
	out.ResidualDB, out.FadingDB = math.Sqrt(resid2/n), fadSum/n
	out.Points = out.Usage.Used
	// readings of windows that gave no bearing count as left out
	for i, e := range w.errs {
		if e != nil {
			out.Usage.Readings += w.counts[i]
			out.Usage.Unfitted += w.counts[i]
		}
	}
	out.Warnings = append(out.Warnings, fmt.Sprintf("long sweep: combined from %d windows of %.0f s", len(c.Used), w.windowS))
	for _, x := range c.Excluded {
		out.Warnings = append(out.Warnings, fmt.Sprintf("a window at %.1f° left out: %s", x.BearingDeg, x.Reason))
	}
	out.Warnings = append(out.Warnings, c.Warnings...)
	// the windows' own warnings, once each kind
	seen := map[string]bool{}
	for _, e := range good {
		for _, s := range e.Warnings {
			k := s
			if i := strings.IndexByte(s, ':'); i > 0 {
				k = s[:i]
			}
			if !seen[k] {
				seen[k] = true
				out.Warnings = append(out.Warnings, s+" (in a window)")
			}
		}
	}
	if nf := len(w.errs) - len(good); nf > 0 {
		out.Warnings = append(out.Warnings, fmt.Sprintf("%d window(s) gave no bearing: %v", nf, firstErr))
	}
	return out, nil
}
