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
	// ToneHz is the tone pitch (0 for a keyed carrier or none found); WPM
	// the speed read (that of the segment with the most characters).
	ToneHz, WPM float64
	// Words are the decoded words of three characters or more read with
	// no unreadable character, for naming transmitters without a list.
	Words    []string
	Warnings []string
}

// MaxEnvelopeS is how much of a transmission's key-down envelope the
// template method keeps (from its start): an identifier repeats every few
// seconds, so ten minutes hold plenty of copies, and memory stays bounded
// for a transmission of any length. Decoded characters are kept for the
// whole transmission.
const MaxEnvelopeS = 600.0

// segRead is what one segment gave, waiting for the next segment to say
// where their overlap is split.
type segRead struct {
	startS, endS float64 // the segment's time span
	startOwn     float64 // from where it is kept (the previous overlap's middle)
	mode         morse.Mode
	chars        []morse.Char // absolute times
	tones        []morse.Mark // long tones, absolute times
	env          []float32    // template envelope
	envStartS    float64      // time of env[0]
	envRate      float64      // its rate
	toneHz, wpm  float64
	warnings     []string
}

// Transmission gathers the segments of one transmission.
type Transmission struct {
	id      *Identifier
	pending *segRead
	// kept, after splitting overlaps
	chars     []morse.Char
	tones     []morse.Mark
	env       []float32
	envStartS float64
	envRate   float64
	modes     map[morse.Mode]float64 // seconds of each mode
	tonesHz   []float64
	toneW     []float64
	wpm       float64
	wpmChars  int
	warnings  []string
	seen      map[string]bool
	segments  int
}

// Begin starts a transmission.
func (id *Identifier) Begin() *Transmission {
	return &Transmission{id: id, modes: map[morse.Mode]float64{}, seen: map[string]bool{}}
}

// Add reads the next segment: it decides the keying mode (Options.Mode,
// or morse.DetectMode on this segment, the power track when the receiver
// found keying), decodes it, and keeps the characters, long tones and the
// template envelope, the part the previous segment also covered split at
// the overlap's middle. Errors: segments out of time order.
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
	opts := morse.DecodeOptions{Mode: mode}
	var d morse.Decoded
	var err error
	var t0 float64
	switch {
	case mode == morse.ModeCW && hasPower:
		t0 = seg.PowerStartS
		d, err = morse.DecodeKeyed(seg.Power, seg.PowerRateHz, opts)
		r.env, r.envStartS, r.envRate = append([]float32(nil), seg.Power...), seg.PowerStartS, seg.PowerRateHz
		if hasAudio { // the tone of a carrier-keyed MCW identifier, for its fingerprint
			if f, _, ferr := morse.FindTone(seg.FM, seg.AudioRateHz); ferr == nil {
				r.toneHz = f
			}
		}
	case hasAudio && mode != morse.ModeCW:
		audio := seg.FM
		if mode == morse.ModeAM {
			audio = seg.AM
		}
		t0 = seg.AudioStartS
		d, err = morse.DecodeTone(audio, seg.AudioRateHz, opts)
		if t.id.matcher != nil {
			if env, er, _, eerr := morse.ToneEnvelope(audio, seg.AudioRateHz, opts); eerr == nil {
				r.env, r.envStartS, r.envRate = env, seg.AudioStartS, er
			}
		}
		if err == nil {
			r.toneHz = d.ToneHz
		}
	default:
		return r, nil
	}
	if err != nil {
		r.warnings = append(r.warnings, "no identifier decoded: "+err.Error())
		return r, nil
	}
	for _, c := range d.Chars {
		c.StartS += t0
		c.EndS += t0
		r.chars = append(r.chars, c)
	}
	for _, m := range d.LongTones() {
		m.StartS += t0
		r.tones = append(r.tones, m)
	}
	r.wpm = d.WPM
	r.warnings = append(r.warnings, d.Warnings...)
	return r, nil
}

// keep adds what segment r read between r.startOwn and cut: characters
// and long tones by their middle, the envelope sample by sample.
func (t *Transmission) keep(r *segRead, cut float64) {
	t.segments++
	lo := r.startOwn
	in := func(a, b float64) bool { m := (a + b) / 2; return m >= lo && m < cut }
	n := 0
	for _, c := range r.chars {
		if in(c.StartS, c.EndS) {
			if n == 0 && len(t.chars) > 0 && !c.WordBefore {
				// the first character kept after a split: a word break
				// when the segments' characters are far apart
				c.WordBefore = c.StartS-t.chars[len(t.chars)-1].EndS > 7*1.2/math.Max(r.wpm, 1)
			}
			t.chars = append(t.chars, c)
			n++
		}
	}
	for _, m := range r.tones {
		if in(m.StartS, m.StartS+m.DurS) {
			t.tones = append(t.tones, m)
		}
	}
	own := math.Min(cut, r.endS) - math.Max(lo, r.startS)
	if own > 0 {
		t.modes[r.mode] += own
		if r.toneHz > 0 {
			t.tonesHz = append(t.tonesHz, r.toneHz)
			t.toneW = append(t.toneW, own)
		}
	}
	if n > t.wpmChars {
		t.wpm, t.wpmChars = r.wpm, n
	}
	for _, w := range r.warnings {
		if !t.seen[w] {
			t.seen[w] = true
			t.warnings = append(t.warnings, w)
		}
	}
	// The template envelope: only of one rate (the first segment's), and
	// at most MaxEnvelopeS of it.
	if len(r.env) == 0 || (t.envRate != 0 && r.envRate != t.envRate) {
		return
	}
	if t.envRate == 0 {
		t.envRate, t.envStartS = r.envRate, math.Max(lo, r.envStartS)
	}
	maxN := int(MaxEnvelopeS * t.envRate)
	for i, v := range r.env {
		ts := r.envStartS + float64(i)/r.envRate
		if ts < lo || ts >= cut {
			continue
		}
		// Samples land at their own time; a gap between segments is
		// filled with zeros (no key-down).
		k := int(math.Round((ts - t.envStartS) * t.envRate))
		if k < len(t.env) || k >= maxN {
			continue
		}
		for len(t.env) < k {
			t.env = append(t.env, 0)
		}
		t.env = append(t.env, v)
	}
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
// repeats (idmatch.Repeated).
func (t *Transmission) Finish(cutStart, cutEnd bool) Burst {
	if t.pending != nil {
		t.keep(t.pending, math.Inf(1))
		t.pending = nil
	}
	b := Burst{Ident: idmatch.Unknown, Mode: morse.ModeAuto, WPM: t.wpm, Warnings: t.warnings}
	best := 0.0
	for _, m := range []morse.Mode{morse.ModeFM, morse.ModeAM, morse.ModeCW, morse.ModeAuto} {
		if v := t.modes[m]; v > best {
			b.Mode, best = m, v
		}
	}
	b.ToneHz = weightedMedian(t.tonesHz, t.toneW)
	var sb strings.Builder
	for i, c := range t.chars {
		if i > 0 && c.WordBefore {
			sb.WriteByte(' ')
		}
		sb.WriteString(c.Text)
	}
	b.Text = sb.String()
	b.Words = words(t.chars)
	if t.segments == 0 {
		b.Warnings = append(b.Warnings, "no audio or level track to identify from")
		return b
	}
	if m := t.id.matcher; m != nil {
		d := morse.Decoded{Chars: t.chars, Text: b.Text}
		// The evidence's time base is the envelope's.
		off := t.envStartS
		for i := range d.Chars {
			d.Chars[i].StartS -= off
			d.Chars[i].EndS -= off
		}
		for _, tn := range t.tones {
			tn.StartS -= off
			d.Keying = append(d.Keying, tn)
		}
		mt := m.Identify(idmatch.Evidence{Decoded: d, Envelope: t.env, EnvRate: t.envRate, CutStart: cutStart, CutEnd: cutEnd})
		for i := range d.Chars {
			d.Chars[i].StartS += off
			d.Chars[i].EndS += off
		}
		b.Ident, b.Confidence, b.Method = mt.ID, mt.Confidence, mt.Method
		for _, sc := range mt.Scores {
			if sc.ID == mt.ID && mt.Method == "text" {
				b.Copies = sc.TextCopies
			}
		}
		b.Warnings = append(b.Warnings, mt.Warnings...)
		return b
	}
	if w, conf, n := idmatch.Repeated(t.chars); n >= 2 {
		b.Ident, b.Confidence, b.Method, b.Copies = w, conf, "repeated-text", n
	}
	return b
}

// words splits characters into words at word breaks and keeps those of
// three or more characters with none unreadable.
func words(chars []morse.Char) []string {
	var out []string
	var cur strings.Builder
	bad, n := false, 0
	flush := func() {
		if n >= 3 && !bad {
			out = append(out, cur.String())
		}
		cur.Reset()
		bad, n = false, 0
	}
	for i, c := range chars {
		if i > 0 && c.WordBefore {
			flush()
		}
		cur.WriteString(c.Text)
		n++
		bad = bad || c.Text == morse.UnknownChar
	}
	flush()
	return out
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
