package survey

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"sort"
	"strings"
	"time"

	"nullseek/bearing"
	"nullseek/geo"
	"nullseek/heading"
	"nullseek/ident/idmatch"
	"nullseek/internal/atomicfile"
	"nullseek/receiver"
)

// BearingPlan asks Run to fit bearings while it scans (Options.Bearing).
type BearingPlan struct {
	// Track gives the antenna's heading at each reading's time.
	Track *heading.Track
	// Pattern and Fit are the fit's pattern and options; Fit.NoiseFloorDB
	// is filled from the receiver's noise estimate of each piece.
	Pattern bearing.Pattern
	Fit     bearing.FitOptions
	// WindowS is the span of one window of a long transmission (0:
	// bearing.DefaultWindowS).
	WindowS float64
	// Headings, when set, is asked instead of Track for the antenna's
	// heading at a reading's time (seconds from sample 0, mount offset
	// and lag applied as Track.At does), false when it does not know: a
	// heading source that grows while the scan goes on, as a live
	// station's does.
	Headings func(t float64) (float64, bool)
}

// BurstFit is one burst's bearing fitted from its readings.
type BurstFit struct {
	Est bearing.Estimate
	// Err says why no bearing was fitted (the fit refuses rather than
	// inventing one); Est is then empty.
	Err error
	// Points are the readings joined with the headings, for pictures: all
	// of them, or an even thinning to bearing.MaxPlotPoints.
	Points []bearing.Point
}

// BurstBearing is the bearing fitted to one burst's level track.
type BurstBearing struct {
	Index       int
	Ident       string
	Transmitter string
	StartS      float64
	// Start is the burst's start in UTC, zero when the recording does not
	// say when it began.
	Start  time.Time
	Est    bearing.Estimate
	Points []bearing.Point
	// Err says why no bearing was fitted (the fit refuses rather than
	// inventing one); Est is then empty.
	Err error
}

// TxBearing is one transmitter's bearing combined over its bursts.
type TxBearing struct {
	Ident       string
	Transmitter string
	Combined    bearing.Combined
	// Bursts are the per-burst bearings that went into the combination
	// (indices into the BurstBearing slice).
	Bursts []int
	// NullDepthDB and CoverageDeg are the best of the used bursts.
	NullDepthDB, CoverageDeg float64
	// SigmaDeg is the bearing's 1-sigma: the combination's sigma and the
	// site error added in quadrature. The site error (multipath, a pattern
	// that differs at this site) repeats on every turn and every burst, so
	// the data of one site cannot show it; it is added after combining.
	SigmaDeg, SiteSigmaDeg float64
	// Flags are the used bursts' flags, each once.
	Flags []bearing.Flag
	Err   error
	// Time is the UTC start of the first burst used, zero when the
	// recording does not say when it began.
	Time time.Time
	// Site, when set, is where the bearing was taken: its JSON line then
	// carries what fix needs (WriteBearingsJSON sets it).
	Site *Site
}

// Site is where a run's bearings were taken and which north they are
// from. The bearings are true; DeclinationDeg, when set, is the
// declination (degrees, east positive) that turned the magnetic headings
// they were measured with into true ones.
type Site struct {
	// Station names the station; "" names it by its position.
	Station string
	// Lat, Lon (degrees, WGS84) are known when HasPosition; AltM (metres
	// above the WGS84 ellipsoid) is nil when not known.
	Lat, Lon    float64
	HasPosition bool
	AltM        *float64
	// DeclinationDeg is nil when the headings were true.
	DeclinationDeg *float64
}

// Name is the station's name: Station, or its position to 1e-5°.
func (s Site) Name() string {
	if s.Station != "" {
		return s.Station
	}
	return fmt.Sprintf("%.5f %.5f", s.Lat, s.Lon)
}

// bearingTime is a bearing's time as the bearings files write it: to the
// millisecond (rounded, as TxBearing.Record rounds it), "" when unknown.
func bearingTime(t time.Time) string {
	if t.IsZero() {
		return ""
	}
	return t.UTC().Round(time.Millisecond).Format(geo.BearingTimeLayout)
}

// Record is the transmitter's bearing taken at site as a bearings-file
// record (rounded as the bearings files are: geo.RoundTo, geo.RoundSigma,
// the time to the millisecond), false when it has no bearing or the site
// no position. The bearings CSV is written from it, and the bearing line
// of `bearing --json` rounds the same numbers the same way, so that both
// give fix the same bearings (TestBearingLineMatchesRecord).
func (t TxBearing) Record(site Site) (geo.BearingRecord, bool) {
	if t.Err != nil || !site.HasPosition || !finite(t.Combined.BearingDeg) || !finite(t.SigmaDeg) {
		return geo.BearingRecord{}, false
	}
	p, a := geo.PositionDecimals, geo.AngleDecimals
	r := geo.BearingRecord{LOP: geo.LOP{Ident: t.Ident, Station: site.Name(), Lat: geo.RoundTo(site.Lat, p), Lon: geo.RoundTo(site.Lon, p),
		BearingDeg: geo.RoundTo(t.Combined.BearingDeg, a), SigmaDeg: geo.RoundSigma(t.SigmaDeg), Time: t.Time.Round(time.Millisecond),
		Ambiguous: t.Combined.AltBearingDeg != nil}}
	if site.DeclinationDeg != nil {
		r.DeclinationDeg, r.HasDeclination = geo.RoundTo(*site.DeclinationDeg, a), true
	}
	if site.AltM != nil {
		r.AltM, r.HasAltM = geo.RoundTo(*site.AltM, geo.HeightDecimals), true
	}
	if alt := t.Combined.AltBearingDeg; alt != nil && finite(*alt) {
		r.AltBearingDeg, r.HasAltBearing = geo.RoundTo(*alt, a), true
	}
	return r, true
}

// DefaultSiteSigmaDeg is the site error assumed for a VHF bearing from a
// turning antenna when none is given: operational accuracy of a few degrees
// RMS is what field VHF direction finding achieves (common practice, from
// memory; ITU-R SM.2060 separates it from the reflection-free system
// accuracy for this reason).
const DefaultSiteSigmaDeg = 3.0

// MaxSiteSigmaDeg bounds the site error one may give: beyond 45° a
// bearing says nothing a map could use.
const MaxSiteSigmaDeg = 45.0

// Points joins a level track with the heading track. Readings the
// heading track does not cover (outside it or in a gap) are left out; the
// receiver's clipping and key-up marks are carried over (the fit uses a
// clipped reading as a lower bound and leaves key-up readings out).
func Points(level []receiver.LevelSample, track *heading.Track) []bearing.Point {
	return points(level, track.At)
}

// points is Points with the heading at a time given by at.
func points(level []receiver.LevelSample, at func(float64) (float64, bool)) []bearing.Point {
	var pts []bearing.Point
	for _, l := range level {
		h, ok := at(l.T)
		if !ok {
			continue
		}
		pts = append(pts, bearing.Point{T: l.T, HeadingDeg: h, LevelDB: l.LevelDB, Clipped: l.Clipped > 0, KeyUp: l.KeyUp})
	}
	return pts
}

// bearingScan fits bearings from the pieces of a scan (Options.Bearing).
type bearingScan struct {
	plan  BearingPlan
	at    func(float64) (float64, bool)
	cur   *bearing.Windowed
	index int  // the burst the current fit belongs to
	fed   bool // the current burst got readings from pieces
}

func newBearingScan(p BearingPlan) (*bearingScan, error) {
	at := p.Headings
	if at == nil {
		if p.Track == nil {
			return nil, fmt.Errorf("bearing plan: no heading track")
		}
		at = p.Track.At
	}
	if _, err := bearing.NewWindowed(p.Pattern, p.Fit, p.WindowS); err != nil {
		return nil, err
	}
	return &bearingScan{plan: p, at: at, index: -1}, nil
}

func (s *bearingScan) start(burst int) {
	s.cur, _ = bearing.NewWindowed(s.plan.Pattern, s.plan.Fit, s.plan.WindowS) // checked in newBearingScan
	s.index = burst
	s.fed = false
}

// piece adds the transmission's readings of a piece (the overlap with the
// previous piece is skipped by Windowed.Add).
func (s *bearingScan) piece(p *receiver.Piece) {
	if p.Burst != s.index || s.cur == nil {
		s.start(p.Burst)
	}
	_, _, level := p.Between(p.OnS, p.OffS)
	nf := p.NoiseDB
	s.cur.Add(points(level, s.at), &nf)
	s.fed = true
}

// finish finishes the burst's fit (from its own level track when no piece
// brought readings).
func (s *bearingScan) finish(b *receiver.Burst) *BurstFit {
	if b.Index != s.index || s.cur == nil || !s.fed {
		s.start(b.Index)
		nf := b.NoiseDB
		s.cur.Add(points(b.Level, s.at), &nf)
	}
	bf := fitWindowed(s.cur, b.StartS, b.EndS)
	s.cur, s.index = nil, -1
	return bf
}

func fitWindowed(w *bearing.Windowed, startS, endS float64) *BurstFit {
	bf := &BurstFit{Points: append([]bearing.Point(nil), w.PlotPoints()...)}
	if len(bf.Points) == 0 {
		bf.Err = fmt.Errorf("no heading readings during the burst (%.1f–%.1f s): the heading log does not overlap it", startS, endS)
		return bf
	}
	bf.Est, bf.Err = w.Finish()
	return bf
}

// Bearings fits every burst of res against the heading track with pattern
// p (or takes the fit made during the scan, Record.Fit), then combines the
// bursts of each transmitter. siteSigmaDeg (0..MaxSiteSigmaDeg) is added in
// quadrature to each combined sigma.
func Bearings(res *Result, track *heading.Track, p bearing.Pattern, opts bearing.FitOptions, siteSigmaDeg float64) ([]BurstBearing, []TxBearing) {
	var bbs []BurstBearing
	groups := map[string][]int{}
	for _, r := range res.Records {
		bb := BurstBearing{Index: r.Index, Ident: r.Ident, Transmitter: r.Transmitter, StartS: r.StartS, Start: r.Start}
		bf := r.Fit
		if bf == nil {
			switch {
			case r.Level == nil && r.LevelTruncated:
				bf = &BurstFit{Err: fmt.Errorf("the transmission (%.0f s) outlasted the level track the survey keeps; fit it during the scan (survey.Options.Bearing)", r.EndS-r.StartS)}
			default:
				w, err := bearing.NewWindowed(p, opts, 0)
				if err != nil {
					bf = &BurstFit{Err: err}
					break
				}
				nf := r.NoiseDB
				w.Add(Points(r.Level, track), &nf)
				bf = fitWindowed(w, r.StartS, r.EndS)
			}
		}
		bb.Est, bb.Err, bb.Points = bf.Est, bf.Err, bf.Points
		bbs = append(bbs, bb)
		key := txKey(r)
		if key == idmatch.Unknown && r.Parts > 1 {
			// A part of a burst split by fingerprint that fits no
			// transmitter keeps its own bearing line but makes no
			// transmitter of its own (it is not combined, plotted or
			// written to the bearings CSV). A whole burst that fits none
			// (a carrier that filled the recording) still does.
			continue
		}
		if bb.Err == nil {
			groups[key] = append(groups[key], len(bbs)-1)
		} else if _, ok := groups[key]; !ok {
			groups[key] = nil
		}
	}
	keys := make([]string, 0, len(groups))
	for k := range groups {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	var txs []TxBearing
	for _, k := range keys {
		idx := groups[k]
		tb := TxBearing{Ident: k}
		for _, r := range res.Records {
			if txKey(r) == k {
				tb.Transmitter = r.Transmitter
				break
			}
		}
		if len(idx) == 0 {
			tb.Err = fmt.Errorf("no burst of %s gave a bearing", k)
			txs = append(txs, tb)
			continue
		}
		ests := make([]bearing.Estimate, len(idx))
		for i, j := range idx {
			ests[i] = bbs[j].Est
		}
		tb.Combined, tb.Err = bearing.Combine(ests, bearing.CombineOptions{})
		tb.SiteSigmaDeg = siteSigmaDeg
		tb.SigmaDeg = math.Hypot(tb.Combined.SigmaDeg, siteSigmaDeg)
		if tb.Err == nil && !(finite(tb.Combined.BearingDeg) && finite(tb.SigmaDeg)) {
			tb.Err = fmt.Errorf("the combination of %s's bursts is not a number (bearing %v ± %v)", k, tb.Combined.BearingDeg, tb.SigmaDeg)
		}
		for _, u := range tb.Combined.Used {
			tb.Bursts = append(tb.Bursts, idx[u])
			if st := bbs[idx[u]].Start; !st.IsZero() && (tb.Time.IsZero() || st.Before(tb.Time)) {
				tb.Time = st
			}
			e := bbs[idx[u]].Est
			tb.NullDepthDB = math.Max(tb.NullDepthDB, e.NullDepthDB)
			tb.CoverageDeg = math.Max(tb.CoverageDeg, e.CoverageDeg)
			for _, f := range e.Flags {
				if !hasFlag(tb.Flags, f) {
					tb.Flags = append(tb.Flags, f)
				}
			}
		}
		txs = append(txs, tb)
	}
	return bbs, txs
}

func hasFlag(fs []bearing.Flag, f bearing.Flag) bool {
	for _, g := range fs {
		if g == f {
			return true
		}
	}
	return false
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// PlotData is what a polar plot of a transmitter shows, drawn from its
// combined result: the readings of every burst used (each burst's levels
// moved by the difference between its fitted level and the first burst's,
// so that bursts heard at different strengths line up; thinned to
// bearing.MaxPlotPoints), and an estimate carrying the combined bearing,
// the transmitter's sigma (site error included) and the combination's
// choice between a loop's two nulls, at the first burst's level.
func (t TxBearing) PlotData(bbs []BurstBearing) ([]bearing.Point, bearing.Estimate, error) {
	if t.Err != nil || len(t.Bursts) == 0 {
		return nil, bearing.Estimate{}, fmt.Errorf("%s has no bearing to plot", t.Ident)
	}
	ref := bbs[t.Bursts[0]].Est
	var pts []bearing.Point
	for _, i := range t.Bursts {
		b := bbs[i]
		d := ref.LevelDB - b.Est.LevelDB
		if b.Est.Noise == bearing.NoiseThermal {
			// keep each reading's share above the noise: shift the
			// carrier, not the floor
			d = 0
		}
		for _, q := range b.Points {
			q.LevelDB += d
			pts = append(pts, q)
		}
	}
	if len(pts) > bearing.MaxPlotPoints {
		step := float64(len(pts)) / bearing.MaxPlotPoints
		thin := make([]bearing.Point, 0, bearing.MaxPlotPoints)
		for x := 0.0; int(x) < len(pts); x += step {
			thin = append(thin, pts[int(x)])
		}
		pts = thin
	}
	est := ref
	est.BearingDeg = t.Combined.BearingDeg
	est.SigmaDeg = t.SigmaDeg
	est.AltBearingDeg = t.Combined.AltBearingDeg
	return pts, est, nil
}

// txKey names the transmitter a record belongs to: its identifier, or its
// fingerprint cluster when the identifier is unknown.
func txKey(r Record) string {
	if known(r.Ident) {
		return r.Ident
	}
	if r.Transmitter != "" {
		return r.Transmitter
	}
	return idmatch.Unknown // attributed to no transmitter (schedule.Build skips it too)
}

// jsonNum is a number for JSON that is null when not finite; nulled
// collects the names of the fields that were (for a warning).
type jsonNums struct{ nulled []string }

func (j *jsonNums) num(name string, v float64, digits int) *float64 {
	if !finite(v) {
		j.nulled = append(j.nulled, name)
		return nil
	}
	r := round(v, digits)
	return &r
}

// sigma is num for a sigma in degrees, rounded as the bearings files
// round one (geo.RoundSigma: never to 0).
func (j *jsonNums) sigma(name string, v float64) *float64 {
	if !finite(v) {
		j.nulled = append(j.nulled, name)
		return nil
	}
	r := geo.RoundSigma(v)
	return &r
}

func (j *jsonNums) opt(name string, p *float64, digits int) *float64 {
	if p == nil {
		return nil
	}
	return j.num(name, *p, digits)
}

// warning is the sentence that says which fields were written as null.
func (j *jsonNums) warning() string {
	if len(j.nulled) == 0 {
		return ""
	}
	return fmt.Sprintf("not a number, written as null: %s", strings.Join(j.nulled, ", "))
}

// usageJSON is bearing.Usage in a JSON line.
type usageJSON struct {
	Readings   int `json:"readings"`
	Used       int `json:"used"`
	Clipped    int `json:"clipped"`
	KeyUp      int `json:"key_up"`
	BelowNoise int `json:"below_noise"`
	Outliers   int `json:"outliers"`
	Unfitted   int `json:"unfitted"`
}

// burstBearingLine is a `"type":"burst_bearing"` line.
type burstBearingLine struct {
	Type              string     `json:"type"`
	Index             int        `json:"index"`
	Ident             string     `json:"ident"`
	Transmitter       string     `json:"transmitter"`
	StartS            *float64   `json:"start_s"`
	Start             string     `json:"start,omitempty"`
	BurstsUsed        int        `json:"bursts_used"`
	Error             string     `json:"error,omitempty"`
	BearingDeg        *float64   `json:"bearing_deg"`
	SigmaDeg          *float64   `json:"sigma_deg"`
	AltBearingDeg     *float64   `json:"alt_bearing_deg,omitempty"`
	NullDepthDB       *float64   `json:"null_depth_db,omitempty"`
	CoverageDeg       *float64   `json:"coverage_deg,omitempty"`
	Covered           string     `json:"covered,omitempty"`
	ResidualDB        *float64   `json:"residual_db,omitempty"`
	FisherSigmaDeg    *float64   `json:"fisher_sigma_deg,omitempty"`
	ModelSigmaDeg     *float64   `json:"model_sigma_deg,omitempty"`
	BootstrapSigmaDeg *float64   `json:"bootstrap_sigma_deg,omitempty"`
	FadingDB          *float64   `json:"fading_db,omitempty"`
	Points            int        `json:"points"`
	Readings          *usageJSON `json:"readings,omitempty"`
	Mode              string     `json:"mode,omitempty"`
	Flags             []string   `json:"flags,omitempty"`
	Warnings          []string   `json:"warnings,omitempty"`
}

// MarshalJSON writes a `"type":"burst_bearing"` line. A value that is not
// finite is written as null and named in a warning.
func (b BurstBearing) MarshalJSON() ([]byte, error) {
	var j jsonNums
	l := burstBearingLine{Type: "burst_bearing", Index: b.Index, Ident: b.Ident, Transmitter: b.Transmitter,
		StartS: j.num("start_s", b.StartS, 4), Start: rfc3339(b.Start)}
	if b.Err != nil {
		l.Error = b.Err.Error()
	} else {
		e := b.Est
		l.BurstsUsed = 1
		l.BearingDeg = j.num("bearing_deg", e.BearingDeg, 2)
		l.SigmaDeg = j.sigma("sigma_deg", e.SigmaDeg)
		l.AltBearingDeg = j.opt("alt_bearing_deg", e.AltBearingDeg, 2)
		l.NullDepthDB = j.num("null_depth_db", e.NullDepthDB, 1)
		l.CoverageDeg = j.num("coverage_deg", e.CoverageDeg, 1)
		l.Covered = bearing.FormatArcs(e.Arcs)
		l.ResidualDB = j.num("residual_db", e.ResidualDB, 2)
		l.FisherSigmaDeg = j.sigma("fisher_sigma_deg", e.FisherSigmaDeg)
		l.ModelSigmaDeg = j.sigma("model_sigma_deg", e.ModelSigmaDeg)
		l.BootstrapSigmaDeg = j.sigma("bootstrap_sigma_deg", e.BootstrapSigmaDeg)
		l.FadingDB = j.num("fading_db", e.FadingDB, 2)
		l.Points = e.Points
		u := e.Usage
		l.Readings = &usageJSON{u.Readings, u.Used, u.Clipped, u.KeyUp, u.BelowNoise, u.Outliers, u.Unfitted}
		l.Mode = e.Mode.String()
		l.Flags = bearing.FlagNames(e.Flags)
		l.Warnings = append(l.Warnings, e.Warnings...)
		if l.BearingDeg == nil || l.SigmaDeg == nil {
			l.BurstsUsed = 0
		}
	}
	if w := j.warning(); w != "" {
		l.Warnings = append(l.Warnings, w)
	}
	return json.Marshal(l)
}

type excludedJSON struct {
	BearingDeg *float64 `json:"bearing_deg"`
	Reason     string   `json:"reason"`
}

// txBearingLine is a `"type":"bearing"` line. The keys fix reads are
// those of the bearings CSV's columns (geo.BearingsCSVHeader).
type txBearingLine struct {
	Type           string         `json:"type"`
	Ident          string         `json:"ident"`
	Transmitter    string         `json:"transmitter"`
	Station        string         `json:"station,omitempty"`
	Lat            *float64       `json:"lat,omitempty"`
	Lon            *float64       `json:"lon,omitempty"`
	AltM           *float64       `json:"alt_m,omitempty"`
	Reference      string         `json:"reference"`
	DeclinationDeg *float64       `json:"declination_deg,omitempty"`
	Time           string         `json:"time,omitempty"`
	Ambiguous      bool           `json:"ambiguous"`
	Error          string         `json:"error,omitempty"`
	BearingDeg     *float64       `json:"bearing_deg"`
	SigmaDeg       *float64       `json:"sigma_deg"`
	FitSigmaDeg    *float64       `json:"fit_sigma_deg,omitempty"`
	SiteSigmaDeg   *float64       `json:"site_sigma_deg,omitempty"`
	AltBearingDeg  *float64       `json:"alt_bearing_deg,omitempty"`
	NullDepthDB    *float64       `json:"null_depth_db,omitempty"`
	CoverageDeg    *float64       `json:"coverage_deg,omitempty"`
	BurstsUsed     int            `json:"bursts_used"`
	PValue         *float64       `json:"p_value,omitempty"`
	Excluded       []excludedJSON `json:"excluded,omitempty"`
	Flags          []string       `json:"flags,omitempty"`
	Warnings       []string       `json:"warnings,omitempty"`
}

// MarshalJSON writes a `"type":"bearing"` line. A value that is not finite
// is written as null and named in a warning. With a Site the line carries
// the station, its position, the declination used and the time as the
// bearings CSV does (TxBearing.Record), so that fix reads it.
func (t TxBearing) MarshalJSON() ([]byte, error) {
	var j jsonNums
	l := txBearingLine{Type: "bearing", Ident: t.Ident, Transmitter: t.Transmitter, Reference: heading.True.String(),
		Time: bearingTime(t.Time)}
	if s := t.Site; s != nil {
		if s.HasPosition {
			a := geo.RoundTo(s.Lat, geo.PositionDecimals)
			o := geo.RoundTo(s.Lon, geo.PositionDecimals)
			l.Station, l.Lat, l.Lon = s.Name(), &a, &o
			l.AltM = j.opt("alt_m", s.AltM, geo.HeightDecimals)
		}
		l.DeclinationDeg = j.opt("declination_deg", s.DeclinationDeg, geo.AngleDecimals)
	}
	if t.Err != nil {
		l.Error = t.Err.Error()
	} else {
		c := t.Combined
		l.BearingDeg = j.num("bearing_deg", c.BearingDeg, 2)
		l.SigmaDeg = j.sigma("sigma_deg", t.SigmaDeg)
		l.FitSigmaDeg = j.sigma("fit_sigma_deg", c.SigmaDeg)
		l.SiteSigmaDeg = j.sigma("site_sigma_deg", t.SiteSigmaDeg)
		l.AltBearingDeg = j.opt("alt_bearing_deg", c.AltBearingDeg, 2)
		l.Ambiguous = c.AltBearingDeg != nil
		l.NullDepthDB = j.num("null_depth_db", t.NullDepthDB, 1)
		l.CoverageDeg = j.num("coverage_deg", t.CoverageDeg, 1)
		l.BurstsUsed = c.BurstsUsed
		l.PValue = j.num("p_value", c.PValue, 4)
		for _, e := range c.Excluded {
			l.Excluded = append(l.Excluded, excludedJSON{j.num("excluded.bearing_deg", e.BearingDeg, 2), e.Reason})
		}
		l.Flags = bearing.FlagNames(t.Flags)
		l.Warnings = append(l.Warnings, c.Warnings...)
		if l.BearingDeg == nil || l.SigmaDeg == nil {
			l.BurstsUsed = 0
		}
	}
	if w := j.warning(); w != "" {
		l.Warnings = append(l.Warnings, w)
	}
	return json.Marshal(l)
}

// EstimateLag estimates how late the heading log still is, on top of
// track.LagS, from the transmitter with the most readings
// (bearing.EstimateLag: sweeps must turn both ways). The sign is the
// module's (package heading): positive means the log is late; apply it
// with track.WithLag(track.LagS + lagS). Bursts whose
// level track was not kept (a transmission past the receiver's cap) are
// left out.
func EstimateLag(res *Result, track *heading.Track, p bearing.Pattern, opts bearing.FitOptions) (lagS, sigmaS float64, err error) {
	byTx := map[string][]bearing.Point{}
	for _, r := range res.Records {
		byTx[txKey(r)] = append(byTx[txKey(r)], Points(r.Level, track)...)
	}
	best := ""
	for k, pts := range byTx {
		if best == "" || len(pts) > len(byTx[best]) || (len(pts) == len(byTx[best]) && k < best) {
			best = k
		}
	}
	if best == "" {
		return 0, 0, fmt.Errorf("estimate lag: no bursts found in the recording")
	}
	if len(byTx[best]) == 0 {
		return 0, 0, fmt.Errorf("estimate lag: no level reading of any burst falls inside the heading track (%d bursts): check the heading log's clock", len(res.Records))
	}
	nf := math.Inf(1)
	for _, r := range res.Records {
		if txKey(r) == best {
			nf = math.Min(nf, r.NoiseDB)
		}
	}
	if finite(nf) {
		opts.NoiseFloorDB = &nf
	}
	lag, sig, err := bearing.EstimateLag(byTx[best], p, bearing.LagOptions{Fit: opts})
	if err != nil {
		return 0, 0, fmt.Errorf("estimate lag from %s: %w", best, err)
	}
	return lag, sig, nil
}

// cellNum formats v for a table cell ("-" when not a number; bad is then
// set).
func cellNum(format string, v float64, bad *bool) string {
	if !finite(v) {
		*bad = true
		return "-"
	}
	return fmt.Sprintf(format, v)
}

// WriteBearingTable prints per-burst and per-transmitter bearings for
// people. refNote, when not empty, says which north the bearings are from
// and which direction of the antenna its heading named (the pattern's
// convention); a value that is not a number prints as "-" with a note.
func WriteBearingTable(w io.Writer, bbs []BurstBearing, txs []TxBearing, refNote string) error {
	tw := &errWriter{w: w}
	bad := false
	fmt.Fprintf(tw, "%-5s %-12s %-4s %9s %7s %9s %8s %8s  %s\n", "burst", "ident", "tx", "bearing", "±1σ", "alt", "null dB", "cover", "notes")
	for _, b := range bbs {
		if b.Err != nil {
			fmt.Fprintf(tw, "%-5d %-12s %-4s %9s  %s\n", b.Index, b.Ident, b.Transmitter, "-", b.Err)
			continue
		}
		e := b.Est
		alt := "-"
		if e.AltBearingDeg != nil {
			alt = cellNum("%.1f°", *e.AltBearingDeg, &bad)
		}
		notes := append([]string(nil), e.Warnings...)
		u := e.Usage
		if u.Used < u.Readings {
			notes = append(notes, "used "+u.String())
		}
		fmt.Fprintf(tw, "%-5d %-12s %-4s %9s %7s %9s %8s %8s  %s\n", b.Index, b.Ident, b.Transmitter,
			cellNum("%.1f°", e.BearingDeg, &bad), cellNum("%.2f°", e.SigmaDeg, &bad), alt,
			cellNum("%.1f", e.NullDepthDB, &bad), cellNum("%.0f°", e.CoverageDeg, &bad), strings.Join(notes, "; "))
	}
	fmt.Fprintln(tw)
	fmt.Fprintf(tw, "%-12s %-4s %9s %7s %9s %7s  %s\n", "ident", "tx", "bearing", "±1σ", "alt", "bursts", "notes")
	for _, t := range txs {
		if t.Err != nil {
			fmt.Fprintf(tw, "%-12s %-4s %9s  %s\n", t.Ident, t.Transmitter, "-", t.Err)
			continue
		}
		c := t.Combined
		alt := "-"
		if c.AltBearingDeg != nil {
			alt = cellNum("%.1f°", *c.AltBearingDeg, &bad)
		}
		var notes []string
		if len(t.Flags) > 0 {
			notes = append(notes, "flags: "+strings.Join(bearing.FlagNames(t.Flags), ", "))
		}
		notes = append(notes, c.Warnings...)
		for _, x := range c.Excluded {
			notes = append(notes, fmt.Sprintf("left out %s: %s", cellNum("%.1f°", x.BearingDeg, &bad), x.Reason))
		}
		fmt.Fprintf(tw, "%-12s %-4s %9s %7s %9s %7d  %s\n", t.Ident, t.Transmitter, cellNum("%.1f°", c.BearingDeg, &bad),
			cellNum("%.1f°", t.SigmaDeg, &bad), alt, c.BurstsUsed, strings.Join(notes, "; "))
	}
	fmt.Fprintf(tw, "(±1σ of a transmitter includes a %s site error", cellNum("%.1f°", firstSite(txs), &bad))
	if refNote != "" {
		fmt.Fprintf(tw, "; %s", refNote)
	}
	fmt.Fprintln(tw, ")")
	if bad {
		fmt.Fprintln(tw, "(\"-\": not a number; the fit could not give that value)")
	}
	return tw.err
}

func firstSite(txs []TxBearing) float64 {
	for _, t := range txs {
		if t.Err == nil {
			return t.SiteSigmaDeg
		}
	}
	return 0
}

// BearingOptions are the choices of the bearing and calibrate commands
// that are not about the heading source: the antenna, the fit, the site
// error, the mount offset and the lag.
type BearingOptions struct {
	Antenna bearing.AntennaSpec
	Fit     bearing.FitOptions
	// SiteSigmaDeg is added in quadrature to each transmitter's sigma
	// (--site-sigma; 0..MaxSiteSigmaDeg).
	SiteSigmaDeg float64
	// MountOffsetDeg is the antenna's reference direction minus the
	// heading source's reading (--mount-offset; within ±360°);
	// MountOffsetGiven says it was given (a pattern file may carry one).
	MountOffsetDeg   float64
	MountOffsetGiven bool
	// LagS is how late the heading log is, in seconds (heading.Track.LagS;
	// --lag; within ±60 s: a heading source later than a minute has no
	// business being used).
	LagS float64
	// WindowS is the span of one window of a long transmission (0:
	// bearing.DefaultWindowS).
	WindowS float64
}

// TurningMergeGapS is the merge gap (receiver.Config.MergeGapS) of a
// survey made with a turning antenna: its nulls and back lobe must not
// split a burst. The bearing and calibrate commands and the demo use it.
const TurningMergeGapS = 1.5

// DefaultBearingOptions holds the defaults; the flags read theirs from it.
var DefaultBearingOptions = BearingOptions{Antenna: bearing.DefaultAntenna, Fit: bearing.DefaultFit, SiteSigmaDeg: DefaultSiteSigmaDeg, WindowS: bearing.DefaultWindowS}

// Validate checks every number against its range (NaN and ±Inf fail
// every range), with one error naming the flag.
func (o BearingOptions) Validate() error {
	if err := o.Antenna.Validate(); err != nil {
		return err
	}
	if err := o.Fit.Validate(); err != nil {
		return err
	}
	switch {
	case !(o.SiteSigmaDeg >= 0 && o.SiteSigmaDeg <= MaxSiteSigmaDeg):
		return fmt.Errorf("--site-sigma %v: want degrees in [0, %g] (the site error added to each bearing's sigma)", o.SiteSigmaDeg, MaxSiteSigmaDeg)
	case !(o.MountOffsetDeg > -360 && o.MountOffsetDeg < 360):
		return fmt.Errorf("--mount-offset %v: want degrees within ±360", o.MountOffsetDeg)
	case !(o.LagS >= -60 && o.LagS <= 60):
		return fmt.Errorf("--lag %v: want seconds within ±60", o.LagS)
	case !(o.WindowS >= 0 && o.WindowS <= 86400):
		return fmt.Errorf("bearing window %v s: want seconds in (0, 86400]", o.WindowS)
	}
	return nil
}

// MountOffset is the mount offset to apply with pattern p: the one given,
// or the one a calibrated pattern file carries when none was given. Both
// given and different is an error (the file's was measured; repeating it
// is harmless).
func (o BearingOptions) MountOffset(p bearing.Pattern) (float64, error) {
	switch {
	case !p.MountOffsetSet:
		return o.MountOffsetDeg, nil
	case !o.MountOffsetGiven:
		return p.MountOffsetDeg, nil
	case math.Abs(o.MountOffsetDeg-p.MountOffsetDeg) <= 0.005:
		return o.MountOffsetDeg, nil
	}
	return 0, fmt.Errorf("--mount-offset %g: the pattern file %q carries the mount offset %.2f° that calibrate measured; drop --mount-offset (or give the same)", o.MountOffsetDeg, p.Name, p.MountOffsetDeg)
}

// WriteBearingsJSON writes one JSON line per burst, then one per
// transmitter (BurstBearing.MarshalJSON, TxBearing.MarshalJSON) taken at
// site: the lines `bearing --json` prints, whose "bearing" lines fix
// reads. It is the one writer of that format.
func WriteBearingsJSON(w io.Writer, bbs []BurstBearing, txs []TxBearing, site Site) error {
	enc := json.NewEncoder(w)
	for _, b := range bbs {
		if err := enc.Encode(b); err != nil {
			return err
		}
	}
	for _, t := range txs {
		t.Site = &site
		if err := enc.Encode(t); err != nil {
			return err
		}
	}
	return nil
}

// NoBearing is an error when no transmitter got a bearing (a heading log
// that misses the recording, a sweep under 90°, ...), naming the
// recording at path and up to three of the bursts' reasons; nil when one
// did. A command then has nothing to report and writes no files.
func NoBearing(path string, bbs []BurstBearing, txs []TxBearing) error {
	for _, t := range txs {
		if t.Err == nil {
			return nil
		}
	}
	var reasons []string
	seen := map[string]bool{}
	for _, b := range bbs {
		if b.Err != nil && !seen[b.Err.Error()] {
			seen[b.Err.Error()] = true
			reasons = append(reasons, fmt.Sprintf("burst %d: %v", b.Index, b.Err))
		}
	}
	if len(reasons) > 3 {
		reasons = append(reasons[:3], fmt.Sprintf("and %d more", len(reasons)-3))
	}
	return fmt.Errorf("%s: no bearing from any of its %d bursts: %s", path, len(bbs), strings.Join(reasons, "; "))
}

// Records are the transmitters' bearings taken at site as bearings-file
// records (TxBearing.Record); transmitters without a bearing are left out.
func Records(site Site, txs []TxBearing) []geo.BearingRecord {
	var recs []geo.BearingRecord
	for _, t := range txs {
		if r, ok := t.Record(site); ok {
			recs = append(recs, r)
		}
	}
	return recs
}

// StageLOPs stages in set the transmitters' bearings taken at site (which
// must have a position) as the bearings CSV at path that `fix` reads
// (Records, geo.WriteBearingsCSV); transmitters without a bearing are left
// out.
func StageLOPs(set *atomicfile.Set, path string, site Site, txs []TxBearing) error {
	if !site.HasPosition {
		return fmt.Errorf("the bearings CSV needs the station's position: --station LAT,LON")
	}
	recs := Records(site, txs)
	return set.WriteFunc(path, func(w io.Writer) error { return geo.WriteBearingsCSV(w, recs) })
}
