// Package schedule works out the slot schedule of transmitters sharing a
// channel from their burst times: each transmitter's period (least squares
// against cycle number, with its standard error), clock drift, on-time, gap
// to the next, the cyclic order, predicted next starts and forecast
// collisions of neighbouring slots. Times are seconds from the capture start
// on the receiver's clock unless a field says UTC.
package schedule

import (
	"cmp"
	"errors"
	"fmt"
	"math"
	"nullseek/ident/fingerprint"
	"nullseek/ident/idmatch"
	"nullseek/ident/internal/stats"
	"slices"
	"strings"
	"time"
)

// Options tunes Build. Zero values select the defaults.
type Options struct {
	// NominalPeriodS is the programmed cycle in seconds (e.g. 300 s for five
	// transmitters with one minute each), used as the drift reference and, when
	// it agrees with the data, to number the cycles. 0: unknown, the median of
	// the transmitters' fitted periods is the reference.
	NominalPeriodS float64
	// NextCount is how many start times to predict per transmitter after the
	// end of the recording (0: none; at most MaxNextCount; DefaultOptions
	// has 3).
	NextCount int
	// ListedIDs are the event's expected identifiers, if any: the plan
	// says which of them were heard (have bursts) and which never were.
	ListedIDs []string
	// CaptureStart is the UTC time of the capture start. Zero: derived from the
	// first observation with a non-zero Start (Start − StartS); when none has
	// one, times are reported in seconds only.
	CaptureStart time.Time
	// CaptureEndS is where the recording ended, in seconds from the capture
	// start. 0: the last burst's end. When given, bursts ending within
	// EdgeGuardS of it are taken as cut off (their on-time is not used).
	CaptureEndS float64
	// StartJitterS is the expected 1σ accuracy of a burst start time in seconds
	// (default 0.03 s). It sets the cycle-matching and outlier tolerances and
	// is the assumed σ of a period fitted from only two bursts.
	StartJitterS float64
	// MergeGapS: two bursts of the same transmitter separated by at most this
	// gap (s) are one transmission broken up by fading and are merged. 0: half
	// the transmitter's median burst length; negative: never merge.
	MergeGapS float64
	// EdgeGuardS: a burst starting within this many seconds of the capture
	// start began before the recording; its start is not used for the period
	// fit (default 0.25 s; negative disables).
	EdgeGuardS float64
}

// MaxNextCount bounds Options.NextCount: a thousand cycles ahead is
// further than any clock holds its drift.
const MaxNextCount = 1000

// MaxPeriodS bounds Options.NominalPeriodS: a day (beacons sharing a
// channel cycle in minutes).
const MaxPeriodS = 86400.0

// DefaultOptions returns the defaults the command line starts from: three
// predicted starts, 30 ms start jitter, 0.25 s edge guard.
func DefaultOptions() Options {
	return Options{NextCount: 3, StartJitterS: 0.03, EdgeGuardS: 0.25}
}

// ErrBadOptions is wrapped by Options.Validate's errors.
var ErrBadOptions = errors.New("bad schedule options")

// Validate checks every field against its documented range, naming the
// flag (or field) that sets it.
func (o Options) Validate() error {
	bad := func(format string, a ...any) error {
		return fmt.Errorf(format+": %w", append(a, ErrBadOptions)...)
	}
	finite := func(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }
	switch {
	case !finite(o.NominalPeriodS) || o.NominalPeriodS < 0 || o.NominalPeriodS > MaxPeriodS:
		return bad("--period %v s: give the programmed cycle, more than 0 and at most %g s (a day), or leave it out", o.NominalPeriodS, MaxPeriodS)
	case o.NextCount < 0 || o.NextCount > MaxNextCount:
		return bad("--next %d: predict 0 to %d start times per transmitter", o.NextCount, MaxNextCount)
	case !finite(o.CaptureEndS) || o.CaptureEndS < 0 || o.CaptureEndS > 10*365.25*86400:
		return bad("capture end %v s is not a time in the recording", o.CaptureEndS)
	case !finite(o.StartJitterS) || o.StartJitterS < 0 || o.StartJitterS > 10:
		return bad("start jitter %v s: 0 (default) to 10 s", o.StartJitterS)
	case !finite(o.MergeGapS) || o.MergeGapS > 3600:
		return bad("merge gap %v s: at most an hour (negative: never merge)", o.MergeGapS)
	case !finite(o.EdgeGuardS) || o.EdgeGuardS > 60:
		return bad("edge guard %v s: at most 60 s (negative: off)", o.EdgeGuardS)
	}
	return nil
}

func (o Options) withDefaults() Options {
	if !(o.StartJitterS > 0) {
		o.StartJitterS = 0.03
	}
	if o.EdgeGuardS == 0 || math.IsNaN(o.EdgeGuardS) {
		o.EdgeGuardS = 0.25
	}
	if math.IsNaN(o.NominalPeriodS) || math.IsInf(o.NominalPeriodS, 0) || o.NominalPeriodS < 0 {
		o.NominalPeriodS = 0
	}
	if math.IsNaN(o.CaptureEndS) || math.IsInf(o.CaptureEndS, 0) || o.CaptureEndS < 0 {
		o.CaptureEndS = 0
	}
	if math.IsNaN(o.MergeGapS) || math.IsInf(o.MergeGapS, 0) {
		o.MergeGapS = 0
	}
	return o
}

// Transmitter is one transmitter's place in the slot schedule. Times are
// seconds from the capture start on the receiver's clock. Quantities that
// could not be estimated are NaN (and null in JSON), with Reason saying why.
type Transmitter struct {
	// ID is the transmitter's label (ident or fingerprint label).
	ID string
	// Bursts is the number of bursts attributed (after merging fragments);
	// FitBursts how many starts entered the period fit; Rejected how many
	// starts the fit dropped as outliers.
	Bursts, FitBursts, Rejected int
	// PeriodS is the least-squares slope of start time against cycle number
	// (t_k = T0S + k·PeriodS); PeriodSigmaS its standard error. T0S is the
	// fitted start of the transmitter's first fitted cycle.
	PeriodS, PeriodSigmaS float64
	T0S                   float64
	// CovT0P is the fit covariance [[var T0, cov], [cov, var P]] in s².
	CovT0P [2][2]float64
	// ResidualRMSS is the RMS residual of the start times about the fit (s).
	ResidualRMSS float64
	// OnS is the mean on-time (s) of the bursts not cut off by the capture
	// edges, OnSigmaS their standard deviation.
	OnS, OnSigmaS float64
	// GapS is the silence (s) from this transmitter's end to the next
	// transmitter's start in the cycle, near the end of the recording
	// (negative: they already overlap).
	GapS float64
	// PhaseS is the phase (s, 0…CommonPeriodS) of the transmitter's first
	// fitted start in the common cycle, relative to that of the first
	// transmitter heard (which has phase 0).
	PhaseS float64
	// DriftPPM is (PeriodS − reference)/reference·1e6, reference = the
	// plan's DriftReferenceS: positive means the slot slides later each cycle
	// (the transmitter's clock runs slow against the receiver's).
	// DriftSigmaPPM is PeriodSigmaS/reference·1e6.
	DriftPPM, DriftSigmaPPM float64
	// RelativeDriftPPM maps every other fitted transmitter j to
	// (PeriodS − P_j)/P_j·1e6.
	RelativeDriftPPM map[string]float64
	// NextOnS are the predicted next starts after the end of the recording
	// (s), NextOnSigmaS their 1σ from the fit covariance (uncertainty of the
	// fitted line, not including the start jitter of the next burst itself),
	// and NextOn the same as UTC (nil when the capture start is unknown).
	NextOnS      []float64
	NextOnSigmaS []float64
	NextOn       []time.Time
	// Reason explains missing estimates ("" when all are present).
	Reason string

	firstHeardS float64
	ons         int
}

// HasPeriod reports whether a period was fitted.
func (t *Transmitter) HasPeriod() bool { return !math.IsNaN(t.PeriodS) }

// Collision is a forecast of two neighbouring slots running into each other at
// the measured drifts: the moment B's start reaches A's end (A is before B in
// the cycle).
type Collision struct {
	A, B string
	// AtS is the forecast time (s from capture start), At the same in UTC
	// (zero when the capture start is unknown).
	AtS float64
	At  time.Time
	// Cycles is (AtS − end of recording)/common period; negative when the
	// slots already overlapped during the recording (Already).
	Cycles float64
	// SigmaS is the 1σ of AtS propagated from the two fits and A's on-time.
	SigmaS float64
	// ClosingSPerCycle is how much the gap shrinks per cycle (P_A − P_B, s),
	// ClosingSigmaS its 1σ. A closing rate within 2σ of zero makes the
	// forecast unreliable (Significant false).
	ClosingSPerCycle, ClosingSigmaS float64
	Significant                     bool
	Already                         bool
}

// Overlap is a pair of bursts from different transmitters on the air at
// the same time during the recording, or one burst in which the receiver saw
// two carriers (B is then idmatch.Unknown, IndexB −1).
type Overlap struct {
	A, B           string
	IndexA, IndexB int
	// StartS and EndS bound the overlap (s from capture start).
	StartS, EndS float64
	Start        time.Time
	// Source is "intervals" (their bursts' intervals intersect), "receiver"
	// (it saw two carriers in one burst), "two identifiers" (both read
	// whole in one burst their fingerprints could not split) or
	// "fingerprint split" (one burst
	// whose carrier offset or tone stepped was split between them: they
	// met at StartS = EndS, the split).
	Source string
}

// Plan is the slot schedule of the transmitters sharing a channel.
type Plan struct {
	// Order is the cyclic order of transmitters: sorted by the phase of their
	// first start within the common cycle, rotated so that the first
	// transmitter heard comes first.
	Order []string
	// Transmitters is in Order.
	Transmitters []Transmitter
	Collisions   []Collision
	Overlaps     []Overlap
	// CommonPeriodS is the cycle used for phases and gaps: the nominal period
	// when given, else the median fitted period (NaN if none).
	CommonPeriodS float64
	// DriftReferenceS is the period drifts are measured against and
	// DriftReference says what it is ("nominal 300 s" or "median of
	// transmitters").
	DriftReferenceS float64
	DriftReference  string
	// CaptureStart is the UTC capture start (zero if unknown).
	CaptureStart time.Time
	// EndS is the end of the recording used for predictions (s).
	EndS float64
	// NominalPeriodS is the programmed cycle given (0: none) and
	// NominalFits whether the start times bear it out; when they do not,
	// drifts are measured against the median of the transmitters instead
	// (a drift against a cycle the beacons do not keep means nothing) and
	// NominalMisfit says what the starts show.
	NominalPeriodS float64
	NominalFits    bool
	NominalMisfit  string
	// Heard and NotHeard split Options.ListedIDs into those that have
	// bursts and those that never came up, in list order.
	Heard, NotHeard []string
	// Notes lists adjustments made (skipped bursts, merged fragments,
	// rejected starts, nominal period overridden).
	Notes []string
}

// Transmitter returns the entry for id, or nil.
func (p *Plan) Transmitter(id string) *Transmitter {
	for i := range p.Transmitters {
		if p.Transmitters[i].ID == id {
			return &p.Transmitters[i]
		}
	}
	return nil
}

// labelled is a burst (position in the input) with its transmitter.
type labelled struct {
	id  string
	idx int
}

// txBurst is one (possibly merged) burst of a transmitter.
type txBurst struct {
	startS, endS     float64
	startCut, endCut bool // cut off by the capture start / end
}

// Build derives the slot schedule from burst observations.
//
// labels gives the transmitter of each burst (e.g. ClusterResult.Labels or
// ClusterResult.Idents); nil or an empty entry falls back to the burst's
// Ident, and bursts with neither are skipped (noted).
//
// Per transmitter, fragments of one transmission are merged, bursts cut off by
// the capture start are kept out of the period fit, and the start times are
// fitted by least squares against cycle number, t_k = t0 + k·P. Cycle numbers
// are k = round((t − t_first)/P_guess), so missed bursts leave gaps in k
// rather than breaking the fit. P_guess is the largest period that explains
// the most consecutive start differences as whole multiples (common to all
// transmitters when it explains a transmitter's differences, else its own),
// and longer than the bursts themselves. Starts further than max(6·jitter,
// 4·robust σ) from the line are dropped one at a time (at most a third).
//
// Errors: fewer than 3 usable bursts in total, a labels slice of the wrong
// length, or a non-finite or reversed burst time. A transmitter with fewer
// than 2 usable starts gets NaN period and drift with a Reason.
func Build(obs []fingerprint.Observation, labels []string, opts Options) (*Plan, error) {
	if labels != nil && len(labels) != len(obs) {
		return nil, fmt.Errorf("build schedule: %d labels for %d bursts", len(labels), len(obs))
	}
	if err := opts.Validate(); err != nil {
		return nil, err
	}
	b := &builder{obs: obs, opts: opts.withDefaults()}
	b.plan = &Plan{CaptureStart: b.opts.CaptureStart}
	if err := b.attribute(labels); err != nil {
		return nil, fmt.Errorf("build schedule: %w", err)
	}
	b.group()
	b.fit()
	b.reference()
	b.order()
	b.gapsAndCollisions()
	b.predict()
	b.listed()
	b.plan.Transmitters = b.txs
	b.plan.Overlaps = findOverlaps(obs, b.used, b.plan.CaptureStart)
	return b.plan, nil
}

// builder holds the intermediate state of Build; its methods
// are the steps, in order.
type builder struct {
	obs     []fingerprint.Observation
	opts    Options
	plan    *Plan
	used    []labelled
	edgeEnd bool // plan.EndS is the real capture end
	ids     []string
	bursts  map[string][]txBurst
	onMedS  map[string]float64 // median on-time per transmitter (0 if none)
	guessS  float64            // period used to number cycles
	nominal bool               // the nominal period numbers the cycles
	txs     []Transmitter
}

func (b *builder) note(format string, args ...any) {
	b.plan.Notes = append(b.plan.Notes, fmt.Sprintf(format, args...))
}

// attribute checks the bursts, picks each one's transmitter and finds the
// capture start and end.
func (b *builder) attribute(labels []string) error {
	skipped := 0
	for i, o := range b.obs {
		if err := checkTimes(o); err != nil {
			return fmt.Errorf("burst %d (index %d): %w", i, o.Index, err)
		}
		id := ""
		if labels != nil {
			id = strings.TrimSpace(labels[i])
		}
		if id == "" && idmatch.Known(o.Ident) {
			id = strings.TrimSpace(o.Ident)
		}
		if id == "" || strings.EqualFold(id, idmatch.Unknown) {
			skipped++
			continue
		}
		b.used = append(b.used, labelled{id, i})
		if b.plan.CaptureStart.IsZero() && !o.Start.IsZero() {
			b.plan.CaptureStart = o.Start.Add(-time.Duration(o.StartS * float64(time.Second)))
		}
	}
	if skipped > 0 {
		b.note("%d burst(s) without transmitter label or readable ID skipped", skipped)
	}
	if len(b.used) < 3 {
		return fmt.Errorf("%d usable burst(s); at least 3 are needed (label bursts or cluster them first)", len(b.used))
	}
	endS := 0.0
	for _, u := range b.used {
		endS = max(endS, b.obs[u.idx].EndS)
	}
	if c := b.opts.CaptureEndS; c > 0 {
		if c < endS {
			b.note("capture end %.3f s is before the last burst end %.3f s; using the latter", c, endS)
		} else {
			endS, b.edgeEnd = c, true
		}
	}
	b.plan.EndS = endS
	return nil
}

// group sorts each transmitter's bursts in time, marks those cut by the
// capture edges and merges fragments of one transmission.
func (b *builder) group() {
	groups := map[string][]int{}
	for _, u := range b.used {
		if _, ok := groups[u.id]; !ok {
			b.ids = append(b.ids, u.id)
		}
		groups[u.id] = append(groups[u.id], u.idx)
	}
	guard, endS := b.opts.EdgeGuardS, b.plan.EndS
	b.bursts = map[string][]txBurst{}
	b.onMedS = map[string]float64{}
	for _, id := range b.ids {
		idx := groups[id]
		slices.SortStableFunc(idx, func(x, y int) int { return cmp.Compare(b.obs[x].StartS, b.obs[y].StartS) })
		bs := make([]txBurst, 0, len(idx))
		for _, i := range idx {
			o := b.obs[i]
			bs = append(bs, txBurst{
				startS:   o.StartS,
				endS:     o.EndS,
				startCut: o.CutStart || (guard > 0 && o.StartS <= guard),
				endCut:   o.CutEnd || (b.edgeEnd && guard > 0 && o.EndS >= endS-guard),
			})
		}
		gap := b.opts.MergeGapS
		if gap == 0 {
			d := make([]float64, len(bs))
			for k, x := range bs {
				d[k] = x.endS - x.startS
			}
			gap = 0.5 * stats.Median(d)
		}
		merged := bs[:1]
		for _, x := range bs[1:] {
			last := &merged[len(merged)-1]
			if gap > 0 && x.startS-last.endS <= gap {
				last.endS = max(last.endS, x.endS)
				last.endCut = last.endCut || x.endCut
				continue
			}
			merged = append(merged, x)
		}
		if n := len(bs) - len(merged); n > 0 {
			b.note("%s: %d fragment(s) within %.3g s merged into the preceding burst", id, n, gap)
		}
		b.bursts[id] = merged
		if on := onTimes(merged, false); len(on) > 0 {
			b.onMedS[id] = stats.Median(on)
		}
	}
}

// onTimes returns the on-times of bursts not cut by the capture edges;
// when there are none and fallback is set, of all bursts.
func onTimes(bs []txBurst, fallback bool) []float64 {
	var on []float64
	for _, x := range bs {
		if !x.startCut && !x.endCut {
			on = append(on, x.endS-x.startS)
		}
	}
	if len(on) == 0 && fallback {
		for _, x := range bs {
			on = append(on, x.endS-x.startS)
		}
	}
	return on
}

// fit guesses the common period and fits each transmitter's starts.
func (b *builder) fit() {
	jit := b.opts.StartJitterS
	// A period is longer than the bursts: the common one than the typical
	// transmitter's, each transmitter's own than its own.
	var all, ons []float64
	for _, id := range b.ids {
		all = append(all, startDiffs(b.bursts[id])...)
		ons = append(ons, b.onMedS[id])
	}
	guess, score := guessPeriod(all, stats.Median(ons), jit)
	if nom := b.opts.NominalPeriodS; nom > 0 {
		nomScore := cycleScore(all, nom, jit)
		if len(all) == 0 || nomScore >= score {
			guess, b.nominal = nom, true
		} else {
			b.plan.NominalMisfit = fmt.Sprintf("the nominal period %.6g s does not fit this recording: it explains %d of %d start differences, a cycle of %.6g s explains %d",
				nom, nomScore, len(all), guess, score)
			b.note("%s; cycles numbered with the latter, drifts against the transmitters' median", b.plan.NominalMisfit)
		}
	}
	b.guessS = guess

	b.txs = make([]Transmitter, len(b.ids))
	for n, id := range b.ids {
		bs := b.bursts[id]
		nan := math.NaN()
		tx := Transmitter{ID: id, Bursts: len(bs), PeriodS: nan, PeriodSigmaS: nan, T0S: nan,
			ResidualRMSS: nan, DriftPPM: nan, DriftSigmaPPM: nan, GapS: nan, PhaseS: nan,
			firstHeardS: bs[0].startS}
		on := onTimes(bs, true)
		tx.OnS, tx.OnSigmaS = meanStd(on)
		tx.ons = len(on)

		var starts []float64
		for _, x := range bs {
			if !x.startCut {
				starts = append(starts, x.startS)
			}
		}
		// The common guess unless it fails to explain this transmitter.
		pg := guess
		if d := startDiffs(bs); len(d) > 0 && (math.IsNaN(pg) || cycleScore(d, pg, jit) < len(d)) {
			if own, _ := guessPeriod(d, b.onMedS[id], jit); !math.IsNaN(own) {
				pg = own
			}
		}
		switch {
		case len(starts) < 2:
			tx.Reason = fmt.Sprintf("only %d usable burst start(s); a period needs 2", len(starts))
		case math.IsNaN(pg):
			tx.Reason = "no consistent period in the start differences"
		default:
			f, rej, err := fitStarts(starts, pg, jit)
			if err != nil {
				tx.Reason = err.Error()
				break
			}
			tx.PeriodS, tx.T0S, tx.CovT0P = f.p, f.t0, f.cov
			tx.PeriodSigmaS = math.Sqrt(f.cov[1][1])
			tx.ResidualRMSS = f.rms
			tx.FitBursts, tx.Rejected = f.n, rej
			if f.n == 2 {
				tx.Reason = fmt.Sprintf("period from 2 starts: σ assumes %.3g s start jitter", jit)
			}
			if rej > 0 {
				b.note("%s: %d start(s) off the fitted line dropped", id, rej)
			}
		}
		b.txs[n] = tx
	}
}

// reference sets the common period and drift reference, and the drifts.
func (b *builder) reference() {
	var periods []float64
	for _, tx := range b.txs {
		if tx.HasPeriod() {
			periods = append(periods, tx.PeriodS)
		}
	}
	p := b.plan
	p.NominalPeriodS = b.opts.NominalPeriodS
	if nom := b.opts.NominalPeriodS; nom > 0 && b.nominal && len(periods) > 0 {
		// The cycles fit, but the periods must too: more than 1 % off (10^4
		// ppm, far beyond any crystal) is another cycle, not a drift.
		if m := stats.Median(periods); math.Abs(m-nom) > 0.01*nom {
			b.nominal = false
			p.NominalMisfit = fmt.Sprintf("the nominal period %.6g s does not fit this recording: the transmitters repeat every %.6g s (median)", nom, m)
			b.note("%s; drifts against that median", p.NominalMisfit)
		}
	}
	p.NominalFits = b.opts.NominalPeriodS > 0 && b.nominal
	switch {
	case p.NominalFits:
		p.DriftReferenceS = b.opts.NominalPeriodS
		p.DriftReference = fmt.Sprintf("nominal %.6g s", b.opts.NominalPeriodS)
		p.CommonPeriodS = b.opts.NominalPeriodS
	case len(periods) > 0:
		p.DriftReferenceS = stats.Median(periods)
		p.DriftReference = "median of transmitters"
		if b.opts.NominalPeriodS > 0 {
			p.DriftReference = fmt.Sprintf("median of transmitters (the nominal %.6g s does not fit)", b.opts.NominalPeriodS)
		}
		p.CommonPeriodS = p.DriftReferenceS
	default:
		p.DriftReferenceS = math.NaN()
		p.DriftReference = "none (no transmitter has a period)"
		p.CommonPeriodS = b.guessS
	}
	for i := range b.txs {
		tx := &b.txs[i]
		if !tx.HasPeriod() {
			continue
		}
		if p.DriftReferenceS > 0 {
			tx.DriftPPM = (tx.PeriodS - p.DriftReferenceS) / p.DriftReferenceS * 1e6
			tx.DriftSigmaPPM = tx.PeriodSigmaS / p.DriftReferenceS * 1e6
		}
		tx.RelativeDriftPPM = map[string]float64{}
		for _, o := range b.txs {
			if o.ID != tx.ID && o.HasPeriod() {
				tx.RelativeDriftPPM[o.ID] = (tx.PeriodS - o.PeriodS) / o.PeriodS * 1e6
			}
		}
	}
}

// order sorts the transmitters by the phase of their first start (fitted,
// else the first one not cut by the capture start) in the common cycle,
// relative to that of the first transmitter heard, and rotates the ring so
// that the first transmitter heard comes first.
func (b *builder) order() {
	txs := b.txs
	firstHeard := 0
	for i, tx := range txs {
		if tx.firstHeardS < txs[firstHeard].firstHeardS {
			firstHeard = i
		}
	}
	ref := func(tx *Transmitter) float64 {
		if tx.HasPeriod() {
			return tx.T0S
		}
		return firstUncut(b.bursts[tx.ID])
	}
	tRef, firstID := ref(&txs[firstHeard]), txs[firstHeard].ID
	pc := b.plan.CommonPeriodS
	for i := range txs {
		ph := ref(&txs[i]) - tRef
		if pc > 0 && !math.IsInf(pc, 0) {
			ph = modPos(ph, pc)
		}
		txs[i].PhaseS = ph
	}
	slices.SortStableFunc(txs, func(x, y Transmitter) int {
		if c := cmp.Compare(x.PhaseS, y.PhaseS); c != 0 {
			return c
		}
		return cmp.Compare(x.ID, y.ID)
	})
	rot := slices.IndexFunc(txs, func(t Transmitter) bool { return t.ID == firstID })
	b.txs = append(txs[rot:], txs[:rot]...)
	for _, tx := range b.txs {
		b.plan.Order = append(b.plan.Order, tx.ID)
	}
}

// gapsAndCollisions measures each gap to the next transmitter at the end of
// the recording, and forecasts the closing gaps between neighbouring
// transmitters that have a period (transmitters without one are skipped).
func (b *builder) gapsAndCollisions() {
	txs, pc := b.txs, b.plan.CommonPeriodS
	if len(txs) == 1 {
		txs[0].GapS = linePeriod(&txs[0], pc) - txs[0].OnS
	} else {
		for i := range txs {
			x, y := &txs[i], &txs[(i+1)%len(txs)]
			if _, gap, ok := b.slotPair(x, y); ok {
				x.GapS = gap
			}
		}
	}
	var fitted []*Transmitter
	for i := range txs {
		if txs[i].HasPeriod() {
			fitted = append(fitted, &txs[i])
		}
	}
	if len(fitted) < 2 {
		return
	}
	for i, x := range fitted {
		y := fitted[(i+1)%len(fitted)]
		m, _, ok := b.slotPair(x, y)
		if !ok {
			continue
		}
		if c, ok := forecastCollision(x, y, m, b.plan.EndS, pc); ok {
			c.At, _ = toUTC(b.plan.CaptureStart, c.AtS)
			b.plan.Collisions = append(b.plan.Collisions, c)
		}
	}
}

// slotPair finds x's last start at or before the end of the recording and
// y's first start after it; it returns the offset m between their cycle
// numbers (y's cycle = x's + m) and the gap from x's end to y's start.
func (b *builder) slotPair(x, y *Transmitter) (m, gapS float64, ok bool) {
	pc := b.plan.CommonPeriodS
	lx, ly := lineOf(x, b.bursts[x.ID], pc), lineOf(y, b.bursts[y.ID], pc)
	if math.IsNaN(lx.p) || math.IsNaN(ly.p) {
		return 0, 0, false
	}
	jx := math.Floor((b.plan.EndS - lx.t0) / lx.p)
	xs := lx.t0 + jx*lx.p
	jy := math.Ceil((xs - ly.t0) / ly.p)
	return jy - jx, ly.t0 + jy*ly.p - xs - x.OnS, true
}

// predict extrapolates each fitted line past the end of the recording.
func (b *builder) predict() {
	for i := range b.txs {
		tx := &b.txs[i]
		if b.opts.NextCount <= 0 {
			continue
		}
		t0, p := tx.T0S, tx.PeriodS
		fromNominal := false
		if !tx.HasPeriod() {
			// One usable start: with a programmed cycle that fits the
			// recording, predict along it (the drift is not measured: σ
			// grows by predictDriftPPM a cycle, plus the start jitter).
			first, ok := uncutStart(b.bursts[tx.ID])
			if !b.plan.NominalFits || !ok {
				continue
			}
			t0, p, fromNominal = first, b.plan.NominalPeriodS, true
		}
		k0 := math.Floor((b.plan.EndS-t0)/p) + 1
		for n := range b.opts.NextCount {
			k := k0 + float64(n)
			s := t0 + k*p
			var v float64
			if fromNominal {
				d := k * p * predictDriftPPM * 1e-6
				v = b.opts.StartJitterS*b.opts.StartJitterS + d*d
			} else {
				v = tx.CovT0P[0][0] + 2*k*tx.CovT0P[0][1] + k*k*tx.CovT0P[1][1]
			}
			tx.NextOnS = append(tx.NextOnS, s)
			tx.NextOnSigmaS = append(tx.NextOnSigmaS, math.Sqrt(max(v, 0)))
			if !b.plan.CaptureStart.IsZero() {
				at, _ := toUTC(b.plan.CaptureStart, s)
				tx.NextOn = append(tx.NextOn, at)
			}
		}
		if fromNominal {
			tx.Reason = strings.TrimPrefix(tx.Reason+"; next on from the nominal period (drift not measured)", "; ")
		}
	}
}

// uncutStart is the first start not cut by the recording or a split.
func uncutStart(bs []txBurst) (float64, bool) {
	for _, x := range bs {
		if !x.startCut {
			return x.startS, true
		}
	}
	return 0, false
}

// predictDriftPPM is the clock drift assumed for a transmitter whose
// drift could not be measured (one usable start): 300 ppm, the cycle
// matching's own allowance (cycleTol).
const predictDriftPPM = 300.0

// listed fills Heard and NotHeard from Options.ListedIDs.
func (b *builder) listed() {
	have := map[string]bool{}
	for _, u := range b.used {
		have[strings.ToUpper(u.id)] = true
	}
	for _, id := range b.opts.ListedIDs {
		if have[strings.ToUpper(strings.TrimSpace(id))] {
			b.plan.Heard = append(b.plan.Heard, id)
		} else {
			b.plan.NotHeard = append(b.plan.NotHeard, id)
		}
	}
}

func checkTimes(o fingerprint.Observation) error {
	if math.IsNaN(o.StartS) || math.IsInf(o.StartS, 0) || math.IsNaN(o.EndS) || math.IsInf(o.EndS, 0) {
		return errors.New("start or end time is not a finite number")
	}
	if o.EndS < o.StartS {
		return fmt.Errorf("ends (%.3f s) before it starts (%.3f s)", o.EndS, o.StartS)
	}
	if math.Abs(o.StartS) > 1e9 || math.Abs(o.EndS) > 1e9 {
		return fmt.Errorf("time %.3g s from capture start is out of range", o.StartS)
	}
	return nil
}

// toUTC converts seconds from the capture start to UTC; ok is false (and
// the time zero) when the capture start is unknown or s is beyond ±250 years.
func toUTC(t0 time.Time, s float64) (time.Time, bool) {
	if t0.IsZero() || !(math.Abs(s) < 250*365.25*86400) {
		return time.Time{}, false
	}
	return t0.Add(time.Duration(math.Round(s * float64(time.Second)))).UTC(), true
}

func modPos(x, p float64) float64 {
	m := math.Mod(x, p)
	if m < 0 {
		m += p
	}
	if m >= p {
		m = 0
	}
	return m
}

func meanStd(x []float64) (mean, std float64) {
	for _, v := range x {
		mean += v
	}
	mean /= float64(len(x))
	if len(x) < 2 {
		return mean, 0
	}
	for _, v := range x {
		std += (v - mean) * (v - mean)
	}
	return mean, math.Sqrt(std / float64(len(x)-1))
}

func firstUncut(bs []txBurst) float64 {
	for _, b := range bs {
		if !b.startCut {
			return b.startS
		}
	}
	return bs[0].startS
}

// startDiffs returns consecutive differences of the uncut starts.
func startDiffs(bs []txBurst) []float64 {
	var d []float64
	prev := math.NaN()
	for _, b := range bs {
		if b.startCut {
			continue
		}
		if !math.IsNaN(prev) && b.startS > prev {
			d = append(d, b.startS-prev)
		}
		prev = b.startS
	}
	return d
}

// cycleTol is the tolerance (s) for a difference of m cycles of period c to
// count as explained: 1 % of a cycle or 4 start jitters, plus 300 ppm per
// cycle for clock drift.
func cycleTol(c float64, m, jitterS float64) float64 {
	return max(0.01*c, 4*jitterS) + m*c*300e-6
}

// cycleScore counts the differences that are whole multiples (≥ 1) of c.
func cycleScore(diffs []float64, c, jitterS float64) int {
	n := 0
	for _, d := range diffs {
		m := math.Round(d / c)
		if m >= 1 && math.Abs(d-m*c) <= cycleTol(c, m, jitterS) {
			n++
		}
	}
	return n
}

// guessPeriod picks, among d/k (k = 1…8) for every difference d, the
// largest period longer than minS that explains the most differences, and
// refines it as Σd/Σm over the differences it explains. NaN when there are
// no differences.
func guessPeriod(diffs []float64, minS, jitterS float64) (float64, int) {
	best, bestScore := math.NaN(), 0
	for _, d := range diffs {
		for k := 1.0; k <= 8; k++ {
			c := d / k
			if c <= minS || c <= 0 {
				continue
			}
			s := cycleScore(diffs, c, jitterS)
			if s > bestScore || (s == bestScore && s > 0 && c > best) {
				best, bestScore = c, s
			}
		}
	}
	if bestScore == 0 {
		return math.NaN(), 0
	}
	var sd, sm float64
	for _, d := range diffs {
		m := math.Round(d / best)
		if m >= 1 && math.Abs(d-m*best) <= cycleTol(best, m, jitterS) {
			sd += d
			sm += m
		}
	}
	return sd / sm, bestScore
}

// lineFit is a straight-line fit t = t0 + k·p over cycle numbers k.
type lineFit struct {
	t0, p float64
	cov   [2][2]float64
	rms   float64
	n     int
}

// fitLine fits t = t0 + k·p by ordinary least squares. The covariance
// uses the residual variance s² = SSR/(n−2) when n ≥ 3, else sigmaS².
func fitLine(k, t []float64, sigmaS float64) (lineFit, error) {
	n := len(k)
	if n < 2 || len(t) != n {
		return lineFit{}, errors.New("fewer than 2 starts")
	}
	var kb, tb float64
	for i := range k {
		kb += k[i]
		tb += t[i]
	}
	kb /= float64(n)
	tb /= float64(n)
	var sxx, sxy float64
	for i := range k {
		sxx += (k[i] - kb) * (k[i] - kb)
		sxy += (k[i] - kb) * (t[i] - tb)
	}
	if !(sxx > 0) {
		return lineFit{}, errors.New("all starts fall in one cycle")
	}
	p := sxy / sxx
	if !(p > 0) || math.IsInf(p, 0) {
		return lineFit{}, fmt.Errorf("fitted period %g s is not positive", p)
	}
	t0 := tb - p*kb
	var ssr float64
	for i := range k {
		r := t[i] - (t0 + p*k[i])
		ssr += r * r
	}
	s2 := sigmaS * sigmaS
	if n >= 3 {
		s2 = ssr / float64(n-2)
	}
	f := lineFit{t0: t0, p: p, n: n, rms: math.Sqrt(ssr / float64(n))}
	f.cov[1][1] = s2 / sxx
	f.cov[0][1] = -kb * s2 / sxx
	f.cov[1][0] = f.cov[0][1]
	f.cov[0][0] = s2 * (1/float64(n) + kb*kb/sxx)
	return f, nil
}

// fitStarts numbers the (sorted) starts by cycle with the period guess,
// fits the line and drops outliers one at a time. The cycle numbers are
// shifted so that k = 0 is the first start kept.
func fitStarts(starts []float64, guessS, jitterS float64) (lineFit, int, error) {
	k := make([]float64, len(starts))
	t := slices.Clone(starts)
	for i, s := range starts {
		k[i] = math.Round((s - starts[0]) / guessS)
	}
	f, err := fitLine(k, t, jitterS)
	if err != nil {
		return f, 0, err
	}
	rejected := 0
	for len(t) > 3 && rejected < len(starts)/3 {
		res := make([]float64, len(t))
		worst := 0
		for i := range t {
			res[i] = math.Abs(t[i] - (f.t0 + f.p*k[i]))
			if res[i] > res[worst] {
				worst = i
			}
		}
		tol := max(6*jitterS, 4*1.4826*stats.Median(res))
		if res[worst] <= tol {
			break
		}
		k = slices.Delete(k, worst, worst+1)
		t = slices.Delete(t, worst, worst+1)
		nf, err := fitLine(k, t, jitterS)
		if err != nil {
			break
		}
		f = nf
		rejected++
	}
	// Re-anchor at the first kept start: t0' = t0 + k0·p.
	k0 := k[0]
	if k0 != 0 {
		c := f.cov
		f.t0 += k0 * f.p
		f.cov[0][0] = c[0][0] + 2*k0*c[0][1] + k0*k0*c[1][1]
		f.cov[0][1] = c[0][1] + k0*c[1][1]
		f.cov[1][0] = f.cov[0][1]
	}
	return f, rejected, nil
}

type startLine struct{ t0, p float64 }

func linePeriod(t *Transmitter, pc float64) float64 {
	if t.HasPeriod() {
		return t.PeriodS
	}
	return pc
}

// lineOf is the transmitter's start line: fitted, else its first start
// repeated at the common period.
func lineOf(t *Transmitter, bs []txBurst, pc float64) startLine {
	if t.HasPeriod() {
		return startLine{t.T0S, t.PeriodS}
	}
	if pc > 0 && !math.IsInf(pc, 0) {
		return startLine{firstUncut(bs), pc}
	}
	return startLine{math.NaN(), math.NaN()}
}

// forecastCollision forecasts when B's start reaches A's end, B's cycle j+m
// being in the same slot as A's cycle j (cycle numbers from each fit's T0S).
// ok is false when the gap is not closing.
func forecastCollision(a, b *Transmitter, m, endS, pc float64) (Collision, bool) {
	d := a.PeriodS - b.PeriodS // closing per cycle
	if !(d > 0) {
		return Collision{}, false
	}
	g := b.T0S + m*b.PeriodS - a.T0S - a.OnS // gap at A's cycle 0
	j := g / d
	at := a.T0S + j*a.PeriodS + a.OnS
	// Gradient of at w.r.t. (t0A, PA, t0B, PB, OnA).
	r := a.PeriodS / d
	gA := [2]float64{1 - r, j * (1 - r)}
	gB := [2]float64{r, r * (m + j)}
	gOn := 1 - r
	v := 0.0
	for x := 0; x < 2; x++ {
		for y := 0; y < 2; y++ {
			v += gA[x] * a.CovT0P[x][y] * gA[y]
			v += gB[x] * b.CovT0P[x][y] * gB[y]
		}
	}
	if a.ons > 0 {
		v += gOn * gOn * a.OnSigmaS * a.OnSigmaS / float64(a.ons)
	}
	sigD := math.Sqrt(a.CovT0P[1][1] + b.CovT0P[1][1])
	c := Collision{
		A: a.ID, B: b.ID, AtS: at, SigmaS: math.Sqrt(max(v, 0)),
		ClosingSPerCycle: d, ClosingSigmaS: sigD,
		Significant: d > 2*sigD,
	}
	c.Already = at <= endS
	if pc > 0 {
		c.Cycles = (at - endS) / pc
	}
	return c, true
}

func findOverlaps(obs []fingerprint.Observation, used []labelled, t0 time.Time) []Overlap {
	s := slices.Clone(used)
	slices.SortStableFunc(s, func(a, b labelled) int {
		return cmp.Compare(obs[a.idx].StartS, obs[b.idx].StartS)
	})
	var out []Overlap
	inPair := map[int]bool{}
	for i, u := range s {
		a := obs[u.idx]
		for _, w := range s[i+1:] {
			b := obs[w.idx]
			if b.StartS > a.EndS || (b.StartS == a.EndS && !(a.CutEnd && b.CutStart && a.Index == b.Index)) {
				break
			}
			if w.id == u.id {
				continue
			}
			ov := Overlap{A: u.id, B: w.id, IndexA: a.Index, IndexB: b.Index,
				StartS: b.StartS, EndS: min(a.EndS, b.EndS), Source: "intervals"}
			if a.Index == b.Index && a.CutEnd && b.CutStart {
				// One burst split by fingerprint: they met at the split.
				ov.Source = "fingerprint split"
			}
			ov.Start, _ = toUTC(t0, ov.StartS)
			out = append(out, ov)
			inPair[u.idx], inPair[w.idx] = true, true
		}
	}
	for _, u := range s {
		a := obs[u.idx]
		if a.DoubleCarrier && !inPair[u.idx] {
			ov := Overlap{A: u.id, B: idmatch.Unknown, IndexA: a.Index, IndexB: -1,
				StartS: a.StartS, EndS: a.EndS, Source: "receiver"}
			if idmatch.Known(a.OtherIdent) {
				ov.B, ov.Source = strings.TrimSpace(a.OtherIdent), "two identifiers"
			}
			ov.Start, _ = toUTC(t0, ov.StartS)
			out = append(out, ov)
		}
	}
	return out
}
