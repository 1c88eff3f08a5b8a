// Package ident decides who sent each transmission: it picks the Morse
// decoder for the keying mode (a keyed tone on FM or AM, or a keyed
// carrier), reads the identifier by free decoding or, with a list of
// expected identifiers, by matching the text and the keying itself, and
// names the transmitters a recording holds from the bursts' identifiers
// and fingerprints.
//
// The jobs live in sub-packages: morse (code table and decoders), idmatch
// (identifier lists and matching), fingerprint (telling transmitters apart
// by carrier offset and tone) and schedule (the slot plan). This package
// holds the policy that ties them together; survey only wires the
// receiver to it.
//
// A transmission is fed as segments (Transmission.Add), in time order,
// and its result asked for at the end (Transmission.Finish), so a caller
// can hand over a long transmission in pieces. Times are seconds from the
// capture start.
package ident

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"

	"nullseek/ident/fingerprint"
	"nullseek/ident/idmatch"
	"nullseek/ident/internal/stats"
	"nullseek/ident/morse"
)

// Options says how transmissions are identified. The zero value selects
// the defaults (see DefaultOptions).
type Options struct {
	// Mode is how the identifiers are keyed; morse.ModeAuto decides per
	// transmission (morse.DetectMode).
	Mode morse.Mode
	// IDs is the event's list of expected identifiers (may be empty; at
	// most idmatch.MaxIDs).
	IDs []string
	// MinConfidence (0–1) is the least confidence at which a transmission
	// is given a listed identifier; below it the identifier is
	// idmatch.Unknown and the best candidate goes into a warning. 0 selects
	// idmatch.DefaultMinConfidence.
	MinConfidence float64
	// Cluster tunes the grouping of bursts into transmitters.
	Cluster fingerprint.Options
}

// DefaultOptions returns the defaults: automatic mode, no list, minimum
// confidence idmatch.DefaultMinConfidence.
func DefaultOptions() Options {
	return Options{MinConfidence: idmatch.DefaultMinConfidence}
}

// ErrBadOptions is wrapped by Options.Validate's errors.
var ErrBadOptions = errors.New("bad identification options")

// Validate checks every field against its documented range; the error
// names the command-line flag that sets it.
func (o Options) Validate() error {
	if o.Mode < morse.ModeAuto || o.Mode > morse.ModeCW {
		return fmt.Errorf("--mode: %v is not a keying mode: %w", o.Mode, ErrBadOptions)
	}
	if math.IsNaN(o.MinConfidence) || o.MinConfidence < 0 || o.MinConfidence > 1 {
		return fmt.Errorf("--min-confidence %v is outside 0…1 (a share of bursts named right): %w", o.MinConfidence, ErrBadOptions)
	}
	if len(o.IDs) > 0 {
		if err := idmatch.CheckList(o.IDs); err != nil {
			return fmt.Errorf("--ids: %w", err)
		}
	}
	return nil
}

func (o Options) withDefaults() Options {
	if o.MinConfidence == 0 {
		o.MinConfidence = idmatch.DefaultMinConfidence
	}
	return o
}

// Identifier identifies the transmissions of one recording.
type Identifier struct {
	opts    Options
	matcher *idmatch.Matcher // nil without a list
}

// New checks opts and prepares the identifier (and the matcher, when there
// is a list).
func New(opts Options) (*Identifier, error) {
	if err := opts.Validate(); err != nil {
		return nil, err
	}
	opts = opts.withDefaults()
	id := &Identifier{opts: opts}
	if len(opts.IDs) > 0 {
		m, err := idmatch.New(opts.IDs)
		if err != nil {
			return nil, fmt.Errorf("--ids: %w", err)
		}
		m.MinConfidence = opts.MinConfidence
		id.matcher = m
	}
	return id, nil
}

// Options returns the options in use (defaults filled in).
func (id *Identifier) Options() Options { return id.opts }

// Segment is one piece of a transmission as the receiver hands it over:
// demodulated audio and the channel power track over the same stretch of
// time. Either part may be empty. Segments of one transmission come in
// time order and may overlap (the receiver repeats the end of one piece at
// the start of the next, so an identifier straddling the boundary is
// whole in one of them); identification reads each and keeps, of the
// overlap, what each read nearer its middle. The slices are read during
// Add and not kept.
type Segment struct {
	// AudioStartS is the time of FM[0] and AM[0]; AudioRateHz their sample
	// rate.
	AudioStartS, AudioRateHz float64
	// FM is the FM discriminator output and AM the envelope |x|.
	FM, AM []float32
	// PowerStartS is the time of Power[0] and PowerRateHz the rate of the
	// readings (≥ 50 a second to be decodable); Power is linear channel
	// power (any scale).
	PowerStartS, PowerRateHz float64
	Power                    []float32
	// OverlapS is informational: how much of the segment repeats the one
	// before (the overlap is worked out from the times).
	OverlapS float64
	// Keyed says the receiver found on/off keying with Morse timing on the
	// carrier (a keyed carrier, or one keyed by an MCW identifier's marks):
	// in automatic mode the power track is decoded.
	Keyed bool
}

// Burst is what identification found in one transmission.
type Burst struct {
	// Mode is the keying mode used (the one decided when Options.Mode is
	// auto; morse.ModeAuto when undecided).
	Mode morse.Mode
	// Text is the decoded text ("" when nothing was read).
	Text string
	// Ident is the identifier, or idmatch.Unknown.
	Ident string
	// Confidence (0–1) is the confidence in Ident (0 for Unknown).
	Confidence float64
	// Method says how Ident was found: "text" or "template" (matched
	// against the list), "repeated-text" (the word sent most often, without
	// a list), "fingerprint" (attributed later by Name), or "".
	Method string
	// Copies is how many copies of Ident the text held (0 when not read
	// from text).
	Copies int
	// AlsoHeard are further listed IDs read whole in the same stretch: two
	// transmitters on the air together that their fingerprints could not
	// tell apart (Ident is the one with more copies).
	AlsoHeard []string
	// ToneHz is the tone pitch (0 for a keyed carrier or none found); WPM
	// the speed read (that of the segment with the most characters).
	ToneHz, WPM float64
	// Words are the decoded words of three characters or more read with
	// no unreadable character, each with the chance it was read right, for
	// naming transmitters without a list (Name).
	Words    []idmatch.Word
	Warnings []string
}

// MaxEnvelopeS is how much of a transmission's key-down envelope the
// template method keeps (from its start): an identifier repeats every few
// seconds, so ten minutes hold plenty of copies, and memory stays bounded
// for a transmission of any length. Decoded characters are kept for the
// whole transmission.
const MaxEnvelopeS = 600.0

// Fingerprint steps. Two beacons whose slots drift into each other reach
// the receiver as one burst; their carrier offsets or tones tell the parts
// apart. Each segment is followed in fpBlockS blocks: the carrier offset
// (the FM discriminator's mean: the instantaneous frequency averaged over
// the block; the stronger carrier holds the discriminator while both are
// on) and the tone pitch (FindTone over fpToneWindowS around the block).
// A segment is cut where the medians either side differ by more than
// fpStepTols cluster tolerances (fingerprint.Options) and four robust
// spreads, with at least fpMinSideS on each side; a cut by tone alone is
// kept only when both sides hold characters (a beacon's long tone may sit
// at another pitch than its identifier).
const (
	fpBlockS      = 0.5
	fpToneWindowS = 1.0
	fpStepTols    = 3.0
	fpMinSideS    = 1.0
)

// fpBlock is one block of a segment's fingerprint track.
type fpBlock struct {
	t, offsetHz, toneHz float64 // toneHz 0: none found
}

// spanRead is a stretch of one segment with one fingerprint.
type spanRead struct {
	startS, endS float64
	offsetHz     float64 // median carrier offset from the channel centre (NaN: none)
	toneHz       float64 // pitch used to decode (0: none)
	chars        []morse.Char
	tones        []morse.Mark
	env          []float32
	envStartS    float64
	envRate      float64
	wpm          float64
}

// segRead is what one segment gave, waiting for the next segment to say
// where their overlap is split.
type segRead struct {
	startS, endS float64 // the segment's time span
	startOwn     float64 // from where it is kept (the previous overlap's middle)
	mode         morse.Mode
	spans        []spanRead
	warnings     []string
}

// part is a stretch of the transmission with one fingerprint, as kept.
type part struct {
	startS, endS     float64
	offsets, offW    []float64
	tonesHz, toneW   []float64
	chars            []morse.Char
	tones            []morse.Mark
	env              []float32
	envStartS        float64
	envRate          float64
	wpm              float64
	wpmChars         int
	offsetHz, toneHz float64 // medians, set at Finish
}

// Transmission gathers the segments of one transmission.
type Transmission struct {
	id       *Identifier
	pending  *segRead
	parts    []*part
	modes    map[morse.Mode]float64 // seconds of each mode
	warnings []string
	seen     map[string]bool
	segments int
}

// Begin starts a transmission.
func (id *Identifier) Begin() *Transmission {
	return &Transmission{id: id, modes: map[morse.Mode]float64{}, seen: map[string]bool{}}
}

// Add reads the next segment: it decides the keying mode (Options.Mode,
// or morse.DetectMode on this segment, the power track when the receiver
// found keying), follows its fingerprint (cutting it where two
// transmitters meet, see fpStepTols), decodes each stretch, and keeps the
// characters, long tones and the template envelope, the part the previous
// segment also covered split at the overlap's middle. Errors: segments
// out of time order.
func (t *Transmission) Add(seg Segment) error {
	r, err := t.read(seg)
	if err != nil {
		return err
	}
	if r == nil {
		return nil
	}
	if p := t.pending; p != nil {
		if r.startS < p.startS {
			return fmt.Errorf("identify: segment at %.3f s comes before the one at %.3f s", r.startS, p.startS)
		}
		cut := p.endS
		if r.startS < p.endS {
			cut = (r.startS + p.endS) / 2
		}
		t.keep(p, cut)
		r.startOwn = cut
	}
	t.pending = r
	return nil
}

// read decodes one segment (nil when it holds nothing to read).
func (t *Transmission) read(seg Segment) (*segRead, error) {
	o := t.id.opts
	hasAudio := len(seg.FM)+len(seg.AM) > 0 && seg.AudioRateHz > 0
	hasPower := len(seg.Power) > 1 && seg.PowerRateHz > 0
	if !hasAudio && !hasPower {
		return nil, nil
	}
	mode := o.Mode
	if mode == morse.ModeAuto {
		if seg.Keyed && hasPower {
			mode = morse.ModeCW
		} else {
			mode = morse.DetectMode(seg.FM, seg.AM, seg.AudioRateHz, seg.Power, seg.PowerRateHz)
		}
	}
	r := &segRead{mode: mode, startOwn: math.Inf(-1)}
	if hasAudio {
		n := max(len(seg.FM), len(seg.AM))
		r.startS, r.endS = seg.AudioStartS, seg.AudioStartS+float64(n)/seg.AudioRateHz
	} else {
		r.startS, r.endS = seg.PowerStartS, seg.PowerStartS+float64(len(seg.Power))/seg.PowerRateHz
	}
	switch {
	case mode == morse.ModeCW && hasPower:
		sp := spanRead{startS: r.startS, endS: r.endS, offsetHz: math.NaN()}
		d, err := morse.DecodeKeyed(seg.Power, seg.PowerRateHz, morse.DecodeOptions{Mode: mode})
		sp.env, sp.envStartS, sp.envRate = append([]float32(nil), seg.Power...), seg.PowerStartS, seg.PowerRateHz
		if hasAudio && len(seg.FM) > 0 { // the tone of a carrier-keyed MCW identifier, for its fingerprint
			if f, _, ferr := morse.FindTone(seg.FM, seg.AudioRateHz); ferr == nil {
				sp.toneHz = f
			}
		}
		r.addDecoded(&sp, d, err, seg.PowerStartS)
		r.spans = append(r.spans, sp)
	case hasAudio && mode != morse.ModeCW:
		audio := seg.FM
		if mode == morse.ModeAM || len(audio) == 0 {
			audio = seg.AM
		}
		rate := seg.AudioRateHz
		track := fingerprintTrack(seg.FM, audio, rate, seg.AudioStartS)
		cuts := []int{0, len(audio)}
		if k, byTone := t.stepAt(track); k > 0 {
			cuts = []int{0, min(len(audio), int(math.Round((track[k].t-fpBlockS/2-seg.AudioStartS)*rate))), len(audio)}
			if byTone {
				cuts = append(cuts, -1) // marker: keep only if both sides read characters
			}
		}
		tentative := len(cuts) == 4
		cuts = cuts[:min(len(cuts), 3)]
		for i := 0; i+1 < len(cuts); i++ {
			a, b := cuts[i], cuts[i+1]
			t0 := seg.AudioStartS + float64(a)/rate
			sp := spanRead{startS: t0, endS: seg.AudioStartS + float64(b)/rate}
			sp.offsetHz, sp.toneHz = trackMedians(track, sp.startS, sp.endS)
			opts := morse.DecodeOptions{Mode: mode}
			if len(cuts) > 2 && sp.toneHz > 0 {
				opts.ToneHz, opts.TrackHz = sp.toneHz, 40 // keep off the other transmitter's tone
			}
			d, err := morse.DecodeTone(audio[a:b], rate, opts)
			if t.id.matcher != nil {
				if env, er, _, eerr := morse.ToneEnvelope(audio[a:b], rate, opts); eerr == nil {
					sp.env, sp.envStartS, sp.envRate = env, t0, er
				}
			}
			if err == nil && d.ToneHz > 0 {
				sp.toneHz = d.ToneHz
			}
			r.addDecoded(&sp, d, err, t0)
			r.spans = append(r.spans, sp)
		}
		if tentative && (len(r.spans[0].chars) < 3 || len(r.spans[1].chars) < 3) {
			// A change of pitch without an identifier on both sides: one
			// transmitter (its long tone at another pitch); read it whole.
			r.spans, r.warnings = nil, nil
			sp := spanRead{startS: r.startS, endS: r.endS}
			sp.offsetHz, sp.toneHz = trackMedians(track, r.startS, r.endS)
			opts := morse.DecodeOptions{Mode: mode}
			d, err := morse.DecodeTone(audio, rate, opts)
			if t.id.matcher != nil {
				if env, er, _, eerr := morse.ToneEnvelope(audio, rate, opts); eerr == nil {
					sp.env, sp.envStartS, sp.envRate = env, seg.AudioStartS, er
				}
			}
			if err == nil && d.ToneHz > 0 {
				sp.toneHz = d.ToneHz
			}
			r.addDecoded(&sp, d, err, seg.AudioStartS)
			r.spans = append(r.spans, sp)
		}
	}
	return r, nil
}

// addDecoded moves a decode's characters and long tones to absolute time
// (t0 is the time of the decoded input's first sample).
func (r *segRead) addDecoded(sp *spanRead, d morse.Decoded, err error, t0 float64) {
	if err != nil {
		r.warnings = append(r.warnings, "no identifier decoded: "+err.Error())
		return
	}
	for _, c := range d.Chars {
		c.StartS += t0
		c.EndS += t0
		sp.chars = append(sp.chars, c)
	}
	for _, m := range d.LongTones() {
		m.StartS += t0
		sp.tones = append(sp.tones, m)
	}
	sp.wpm = d.WPM
	r.warnings = append(r.warnings, d.Warnings...)
}

// fingerprintTrack follows a segment's carrier offset (from the FM
// discriminator output fm, radians per sample at rate) and tone pitch
// (in audio) in fpBlockS blocks; t0 is the time of the first sample.
func fingerprintTrack(fm, audio []float32, rate, t0 float64) []fpBlock {
	n := int(fpBlockS * rate)
	w := int(fpToneWindowS * rate)
	var out []fpBlock
	for a := 0; a+n <= max(len(fm), len(audio)); a += n {
		b := fpBlock{t: t0 + (float64(a)+float64(n)/2)/rate, offsetHz: math.NaN()}
		if a+n <= len(fm) {
			s := 0.0
			for _, v := range fm[a : a+n] {
				if !math.IsNaN(float64(v)) && !math.IsInf(float64(v), 0) {
					s += float64(v)
				}
			}
			b.offsetHz = s / float64(n) * rate / (2 * math.Pi)
		}
		c := a + n/2
		lo, hi := max(0, c-w/2), min(len(audio), c+w/2)
		if hi-lo >= w/2 {
			if f, _, err := morse.FindTone(audio[lo:hi], rate); err == nil {
				b.toneHz = f
			}
		}
		out = append(out, b)
	}
	return out
}

// stepAt finds where a segment's fingerprint steps (see fpStepTols): the
// first block of the second side, or 0 for none; byTone says the tone
// alone made it.
func (t *Transmission) stepAt(track []fpBlock) (int, bool) {
	co := t.id.opts.Cluster.Resolved()
	side := int(math.Ceil(fpMinSideS / fpBlockS))
	best, bestK, bestTone := 0.0, 0, false
	for k := side; k+side <= len(track); k++ {
		dOff, sOff, okOff := sideStep(track[:k], track[k:], func(b fpBlock) float64 { return b.offsetHz })
		dTone, sTone, okTone := sideStep(track[:k], track[k:], func(b fpBlock) float64 {
			if b.toneHz > 0 {
				return b.toneHz
			}
			return math.NaN()
		})
		score, byTone := 0.0, false
		if okOff && dOff > fpStepTols*co.OffsetTolHz && dOff > 4*sOff {
			score = dOff / co.OffsetTolHz
		}
		if okTone && dTone > fpStepTols*co.ToneTolHz && dTone > 4*sTone {
			if v := dTone / co.ToneTolHz; v > score {
				score, byTone = v, score == 0
			}
		}
		if score > best {
			best, bestK, bestTone = score, k, byTone
		}
	}
	return bestK, bestTone
}

// sideStep compares the medians of a value on two sides: the difference,
// the larger robust spread (1.4826 MAD), and whether each side had at
// least two values.
func sideStep(l, r []fpBlock, f func(fpBlock) float64) (diff, spread float64, ok bool) {
	vals := func(bs []fpBlock) []float64 {
		var v []float64
		for _, b := range bs {
			if x := f(b); !math.IsNaN(x) {
				v = append(v, x)
			}
		}
		return v
	}
	lv, rv := vals(l), vals(r)
	if len(lv) < 2 || len(rv) < 2 {
		return 0, 0, false
	}
	ml, mr := stats.Median(lv), stats.Median(rv)
	return math.Abs(ml - mr), math.Max(mad(lv, ml), mad(rv, mr)), true
}

func mad(v []float64, m float64) float64 {
	d := make([]float64, len(v))
	for i, x := range v {
		d[i] = math.Abs(x - m)
	}
	return 1.4826 * stats.Median(d)
}

// trackMedians are the median offset (NaN when none) and tone (0 when
// none) of the blocks centred in [a, b).
func trackMedians(track []fpBlock, a, b float64) (offsetHz, toneHz float64) {
	var off, tone []float64
	for _, bl := range track {
		if bl.t < a || bl.t >= b {
			continue
		}
		if !math.IsNaN(bl.offsetHz) {
			off = append(off, bl.offsetHz)
		}
		if bl.toneHz > 0 {
			tone = append(tone, bl.toneHz)
		}
	}
	offsetHz = math.NaN()
	if len(off) > 0 {
		offsetHz = stats.Median(off)
	}
	if len(tone) > 0 {
		toneHz = stats.Median(tone)
	}
	return offsetHz, toneHz
}

// keep adds what segment r read between r.startOwn and cut: characters
// and long tones by their middle, the envelope sample by sample, each span
// to the last part when its fingerprint fits it, else to a new part.
func (t *Transmission) keep(r *segRead, cut float64) {
	t.segments++
	lo := r.startOwn
	for _, w := range r.warnings {
		if !t.seen[w] {
			t.seen[w] = true
			t.warnings = append(t.warnings, w)
		}
	}
	for i := range r.spans {
		sp := &r.spans[i]
		a, b := math.Max(lo, sp.startS), math.Min(cut, sp.endS)
		if b <= a {
			continue
		}
		t.modes[r.mode] += b - a
		p := t.partFor(sp, a)
		p.endS = math.Max(p.endS, b)
		t.keepSpan(p, sp, a, b)
	}
}

// partFor returns the part a span continues: the last one when their
// fingerprints agree within the cluster tolerances (one transmitter), a
// new one otherwise.
func (t *Transmission) partFor(sp *spanRead, a float64) *part {
	co := t.id.opts.Cluster.Resolved()
	if n := len(t.parts); n > 0 {
		p := t.parts[n-1]
		off := weightedMedian(p.offsets, p.offW)
		tone := weightedMedian(p.tonesHz, p.toneW)
		sameOff := math.IsNaN(sp.offsetHz) || len(p.offsets) == 0 || math.Abs(sp.offsetHz-off) <= fpStepTols*co.OffsetTolHz
		sameTone := sp.toneHz == 0 || tone == 0 || math.Abs(sp.toneHz-tone) <= fpStepTols*co.ToneTolHz
		if sameOff && sameTone {
			return p
		}
	}
	p := &part{startS: a, endS: a}
	t.parts = append(t.parts, p)
	return p
}

// keepSpan adds the stretch [a, b) of a span to a part.
func (t *Transmission) keepSpan(p *part, sp *spanRead, a, b float64) {
	in := func(x, y float64) bool { m := (x + y) / 2; return m >= a && m < b }
	n := 0
	for _, c := range sp.chars {
		if in(c.StartS, c.EndS) {
			if n == 0 && len(p.chars) > 0 && !c.WordBefore {
				// the first character kept after a split: a word break
				// when the segments' characters are far apart
				c.WordBefore = c.StartS-p.chars[len(p.chars)-1].EndS > 7*1.2/math.Max(sp.wpm, 1)
			}
			p.chars = append(p.chars, c)
			n++
		}
	}
	for _, m := range sp.tones {
		if in(m.StartS, m.StartS+m.DurS) {
			p.tones = append(p.tones, m)
		}
	}
	if !math.IsNaN(sp.offsetHz) {
		p.offsets, p.offW = append(p.offsets, sp.offsetHz), append(p.offW, b-a)
	}
	if sp.toneHz > 0 {
		p.tonesHz, p.toneW = append(p.tonesHz, sp.toneHz), append(p.toneW, b-a)
	}
	if n > p.wpmChars {
		p.wpm, p.wpmChars = sp.wpm, n
	}
	// The template envelope: only of one rate (the part's first), and at
	// most MaxEnvelopeS of it.
	if len(sp.env) == 0 || (p.envRate != 0 && sp.envRate != p.envRate) {
		return
	}
	if p.envRate == 0 {
		p.envRate, p.envStartS = sp.envRate, math.Max(a, sp.envStartS)
	}
	maxN := int(MaxEnvelopeS * p.envRate)
	for i, v := range sp.env {
		ts := sp.envStartS + float64(i)/sp.envRate
		if ts < a || ts >= b {
			continue
		}
		// Samples land at their own time; a gap is filled with zeros.
		k := int(math.Round((ts - p.envStartS) * p.envRate))
		if k < len(p.env) || k >= maxN {
			continue
		}
		for len(p.env) < k {
			p.env = append(p.env, 0)
		}
		p.env = append(p.env, v)
	}
}

// Part is a stretch of one transmission with one fingerprint: the whole
// transmission, or, when two transmitters were on the air together, the
// stretch where one of them held the channel.
type Part struct {
	// StartS and EndS bound it (s from capture start); SplitStart and
	// SplitEnd say the edge is where the transmission was split, not the
	// transmitter's own edge.
	StartS, EndS         float64
	SplitStart, SplitEnd bool
	// OffsetHz is the carrier offset from the channel centre (from the FM
	// discriminator's mean; NaN when not measured).
	OffsetHz float64
	Burst
}

// Finish names the transmission from everything its segments gave.
// cutStart and cutEnd say the recording began or ended inside it (a copy
// of the identifier cut there counts what it holds).
//
// Policy: the mode is the one that covered the most time; with a list the
// matcher weighs the characters of every segment (each copy of the ID
// adding evidence, the ID found inside longer text) and, when that is not
// enough, the keying template on the kept envelope (idmatch.Matcher.
// Identify); without a list the transmission is named by the word it
// repeats (idmatch.Repeated). A transmission whose fingerprint stepped
// (two transmitters on the air together) is named part by part: the
// returned Burst is the first part's, and Parts holds them all (nil for
// one part).
func (t *Transmission) Finish(cutStart, cutEnd bool) (Burst, []Part) {
	if t.pending != nil {
		t.keep(t.pending, math.Inf(1))
		t.pending = nil
	}
	mode, best := morse.ModeAuto, 0.0
	for _, m := range []morse.Mode{morse.ModeFM, morse.ModeAM, morse.ModeCW, morse.ModeAuto} {
		if v := t.modes[m]; v > best {
			mode, best = m, v
		}
	}
	if t.segments == 0 || len(t.parts) == 0 {
		b := Burst{Ident: idmatch.Unknown, Mode: mode, Warnings: t.warnings}
		b.Warnings = append(b.Warnings, "no audio or level track to identify from")
		return b, nil
	}
	var parts []Part
	for i, p := range t.parts {
		b := t.name(p, mode, cutStart && i == 0, cutEnd && i == len(t.parts)-1)
		if i == 0 {
			b.Warnings = append(t.warnings, b.Warnings...)
		}
		off := weightedMedian(p.offsets, p.offW)
		if len(p.offsets) == 0 {
			off = math.NaN()
		}
		parts = append(parts, Part{StartS: p.startS, EndS: p.endS, SplitStart: i > 0, SplitEnd: i < len(t.parts)-1, OffsetHz: off, Burst: b})
	}
	if len(parts) == 1 {
		return parts[0].Burst, nil
	}
	for i := range parts {
		parts[i].Warnings = append(parts[i].Warnings, fmt.Sprintf("part %d of %d: two transmitters on the air together, told apart by carrier offset and tone", i+1, len(parts)))
	}
	return parts[0].Burst, parts
}

// name identifies one part.
func (t *Transmission) name(p *part, mode morse.Mode, cutStart, cutEnd bool) Burst {
	b := Burst{Ident: idmatch.Unknown, Mode: mode, WPM: p.wpm}
	b.ToneHz = weightedMedian(p.tonesHz, p.toneW)
	var sb strings.Builder
	for i, c := range p.chars {
		if i > 0 && c.WordBefore {
			sb.WriteByte(' ')
		}
		sb.WriteString(c.Text)
	}
	b.Text = sb.String()
	b.Words = idmatch.Words(p.chars)
	if m := t.id.matcher; m != nil {
		d := morse.Decoded{Chars: append([]morse.Char(nil), p.chars...), Text: b.Text}
		// The evidence's time base is the envelope's.
		off := p.envStartS
		for i := range d.Chars {
			d.Chars[i].StartS -= off
			d.Chars[i].EndS -= off
		}
		for _, tn := range p.tones {
			tn.StartS -= off
			d.Keying = append(d.Keying, tn)
		}
		mt := m.Identify(idmatch.Evidence{Decoded: d, Envelope: p.env, EnvRate: p.envRate, CutStart: cutStart, CutEnd: cutEnd})
		b.Ident, b.Confidence, b.Method = mt.ID, mt.Confidence, mt.Method
		b.AlsoHeard = mt.Others
		for _, sc := range mt.Scores {
			if sc.ID == mt.ID && mt.Method == "text" {
				b.Copies = sc.TextCopies
			}
		}
		b.Warnings = append(b.Warnings, mt.Warnings...)
		return b
	}
	if w, conf, n := idmatch.Repeated(p.chars); n >= 2 {
		b.Ident, b.Confidence, b.Method, b.Copies = w, conf, "repeated-text", n
	}
	return b
}

// weightedMedian is the value at half the total weight (0 when empty).
func weightedMedian(x, w []float64) float64 {
	if len(x) == 0 {
		return 0
	}
	idx := make([]int, len(x))
	tot := 0.0
	for i := range idx {
		idx[i] = i
		tot += w[i]
	}
	sort.Slice(idx, func(a, b int) bool { return x[idx[a]] < x[idx[b]] })
	acc := 0.0
	for _, i := range idx {
		acc += w[i]
		if acc >= tot/2 {
			return x[i]
		}
	}
	return x[idx[len(idx)-1]]
}
