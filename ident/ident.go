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
// time. Either part may be empty.
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
	// ToneHz is the tone pitch (0 for a keyed carrier or none found); WPM
	// the speed read.
	ToneHz, WPM float64
	Warnings    []string
}

// Transmission gathers the segments of one transmission.
type Transmission struct {
	id    *Identifier
	fm    []float32
	am    []float32
	power []float32
	rate  float64
	pRate float64
	err   error
}

// Begin starts a transmission.
func (id *Identifier) Begin() *Transmission { return &Transmission{id: id} }

// Add hands over the next segment. Segments must share one audio rate and
// one power rate.
func (t *Transmission) Add(seg Segment) error {
	if len(seg.FM)+len(seg.AM) > 0 {
		if t.rate != 0 && seg.AudioRateHz != t.rate {
			return fmt.Errorf("identify: audio rate changed from %g to %g Hz inside one transmission", t.rate, seg.AudioRateHz)
		}
		t.rate = seg.AudioRateHz
		t.fm = append(t.fm, seg.FM...)
		t.am = append(t.am, seg.AM...)
	}
	if len(seg.Power) > 0 {
		if t.pRate != 0 && seg.PowerRateHz != t.pRate {
			return fmt.Errorf("identify: power rate changed from %g to %g per second inside one transmission", t.pRate, seg.PowerRateHz)
		}
		t.pRate = seg.PowerRateHz
		t.power = append(t.power, seg.Power...)
	}
	return nil
}

// Finish decodes the transmission and names it.
//
// Policy: the mode is Options.Mode, or the one morse.DetectMode finds.
// A keyed tone (FM or AM) with a list goes through Matcher.MatchTone (the
// text when it is clear, else the keying template on the tone envelope);
// without a list it is decoded freely and named by the word it repeats
// (RepeatedWord). A keyed carrier is decoded from the power track and
// matched by its text, or, when nothing decodes, by the template on the
// power track itself.
func (t *Transmission) Finish() Burst {
	b := Burst{Ident: idmatch.Unknown}
	m := t.id.matcher
	mode := t.id.opts.Mode
	if mode == morse.ModeAuto {
		mode = morse.DetectMode(t.fm, t.am, t.rate, t.power, t.pRate)
	}
	b.Mode = mode
	opts := morse.DecodeOptions{Mode: mode}
	audio := t.fm
	if mode == morse.ModeAM {
		audio = t.am
	}
	if m != nil && mode != morse.ModeCW {
		d, mt, err := m.MatchTone(audio, t.rate, opts)
		if err != nil {
			b.Warnings = append(b.Warnings, "no identifier: "+err.Error())
			return b
		}
		b.setDecoded(d)
		b.Ident, b.Confidence, b.Method = mt.ID, mt.Confidence, mt.Method
		b.Warnings = append(b.Warnings, mt.Warnings...)
		return b
	}
	var d morse.Decoded
	var err error
	if mode == morse.ModeCW {
		d, err = morse.DecodeKeyed(t.power, t.pRate, opts)
	} else {
		d, err = morse.DecodeTone(audio, t.rate, opts)
	}
	if err != nil {
		b.Warnings = append(b.Warnings, "no identifier decoded: "+err.Error())
		if m != nil && len(t.power) > 0 {
			// keyed carrier: the template on the power track itself
			mt := m.MatchEnvelope(t.power, t.pRate)
			b.Ident, b.Confidence, b.Method = mt.ID, mt.Confidence, mt.Method
		}
		return b
	}
	b.setDecoded(d)
	if m != nil {
		mt := m.Match(d)
		b.Ident, b.Confidence, b.Method = mt.ID, mt.Confidence, mt.Method
		b.Warnings = append(b.Warnings, mt.Warnings...)
		return b
	}
	b.Ident, b.Confidence, b.Method = RepeatedWord(d)
	return b
}

// setDecoded copies what the decoder read.
func (b *Burst) setDecoded(d morse.Decoded) {
	b.Text = d.Text
	b.ToneHz = d.ToneHz
	b.WPM = d.WPM
	b.Warnings = append(b.Warnings, d.Warnings...)
}
