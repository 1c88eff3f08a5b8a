// Package survey runs the whole listening job on one recording: the
// receiver finds the bursts, ident reads their Morse identifiers and
// fingerprints and groups them into transmitters. It wires packages
// together; the algorithms live in receiver and ident.
package survey

import (
	"context"
	"fmt"
	"math"
	"sort"
	"strings"
	"time"

	"nullseek/ident"
	"nullseek/receiver"
	"nullseek/sdr"
)

// Options configure a survey.
type Options struct {
	Receiver receiver.Config
	// Mode is how the identifiers are keyed (auto by default).
	Mode ident.Mode
	// IDs is the event's list of expected identifiers (may be empty).
	IDs []string
	// NoIdent skips Morse decoding (levels and timing only).
	NoIdent bool
	// MinConfidence is the least matcher confidence reported as an
	// identifier (default 0.7); below it the burst is "unknown" and the
	// best candidate goes into a warning.
	MinConfidence float64
	// Cluster tunes the grouping of bursts into transmitters.
	Cluster ident.ClusterOptions
	// Bearing, when set, fits each transmission's bearing while the scan
	// goes on, window by window from its pieces (bearing.Windowed), so
	// that a transmission of any length gets a bearing with bounded
	// memory; the fits land in Record.Fit.
	Bearing *BearingPlan
}

// Record is one burst with what identification found. Its JSON form, a
// `scan --json` burst line with stable field names, is burstLine (see
// MarshalJSON).
type Record struct {
	receiver.Burst
	Mode            string
	Text            string
	Ident           string
	IdentConfidence float64
	IdentMethod     string
	ToneHz          float64
	WPM             float64
	Transmitter     string
	Warnings        []string
	// Fit is the burst's bearing fitted during the scan (Options.Bearing);
	// nil without a plan.
	Fit *BurstFit
}

// Result is a finished survey.
type Result struct {
	Info     sdr.Info
	Summary  receiver.Summary
	Records  []Record
	Clusters ident.ClusterResult
}

// Run surveys src. progress (may be nil) gets the input samples consumed.
func Run(ctx context.Context, src sdr.Source, opts Options, progress func(int64)) (*Result, error) {
	info := src.Info()
	var matcher *ident.Matcher
	if len(opts.IDs) > 0 {
		m, err := ident.NewMatcher(opts.IDs)
		if err != nil {
			return nil, err
		}
		m.MinConfidence = opts.MinConfidence
		if m.MinConfidence <= 0 {
			m.MinConfidence = 0.7
		}
		matcher = m
	}
	rc := opts.Receiver
	rc.KeepAudio = !opts.NoIdent
	if opts.Mode == ident.ModeCW && rc.MergeGapS == 0 {
		rc.MergeGapS = 2.5 // word gaps of keyed carrier at 5 WPM stay inside one burst
	}
	sc, err := receiver.NewScanner(info, rc)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", info.Name, err)
	}
	res := &Result{Info: info}
	// Identification reads each piece of a transmission as it comes and
	// keeps the most confident reading (a transmission of any length is
	// read with bounded memory).
	var best *Record
	h := receiver.Handler{Progress: progress}
	var fit *bearingScan
	if opts.Bearing != nil {
		if fit, err = newBearingScan(*opts.Bearing); err != nil {
			return nil, err
		}
	}
	if !opts.NoIdent || fit != nil {
		h.Piece = func(p *receiver.Piece) error {
			if fit != nil {
				fit.piece(p)
			}
			if opts.NoIdent {
				return nil
			}
			c := Record{Ident: ident.UnknownIdent}
			// the transmission's part of the piece: audio with 0.1 s either
			// side, the level track from edge to edge
			fm, am, _ := p.Between(p.OnS-0.1, p.OffS+0.1)
			_, _, level := p.Between(p.OnS, p.OffS)
			identify(&c, fm, am, p.ChannelRateHz, level, opts.Mode, matcher)
			if best == nil || betterReading(c, *best) {
				best = &c
			}
			return nil
		}
	}
	h.Burst = func(b *receiver.Burst) error {
		r := Record{Burst: *b, Ident: ident.UnknownIdent}
		if best != nil {
			r.Mode, r.Text, r.ToneHz, r.WPM = best.Mode, best.Text, best.ToneHz, best.WPM
			r.Ident, r.IdentConfidence, r.IdentMethod = best.Ident, best.IdentConfidence, best.IdentMethod
			r.Warnings = best.Warnings
			best = nil
		}
		if b.DoubleCarrier {
			r.Warnings = append(r.Warnings, fmt.Sprintf("carrier stepped by %.0f Hz inside the burst: two transmitters on the air at once?", b.CarrierSpreadHz))
		}
		if fit != nil {
			r.Fit = fit.finish(b)
		}
		// The audio has done its job; keep the record small.
		r.FMAudio, r.AMAudio = nil, nil
		res.Records = append(res.Records, r)
		return nil
	}
	sum, err := sc.Scan(ctx, src, h)
	res.Summary = sum
	if err != nil {
		return res, err // the source's errors name it already
	}
	if len(res.Records) > 0 && !opts.NoIdent {
		obs := Observations(res.Records)
		cr, err := ident.ClusterTransmitters(obs, opts.Cluster)
		if err != nil {
			return res, err
		}
		res.Clusters = cr
		for i := range res.Records {
			res.Records[i].Transmitter = cr.Labels[i]
			if !known(res.Records[i].Ident) && known(cr.Idents[i]) {
				res.Records[i].Ident = cr.Idents[i]
				res.Records[i].IdentMethod = "fingerprint"
				for _, c := range cr.Clusters {
					if c.Label == cr.Labels[i] {
						res.Records[i].IdentConfidence = c.IdentShare
					}
				}
				res.Records[i].Warnings = append(res.Records[i].Warnings,
					"identifier not readable; attributed to "+cr.Labels[i]+" by carrier offset and tone")
			}
		}
	}
	return res, nil
}

func known(id string) bool { return id != "" && !strings.EqualFold(id, ident.UnknownIdent) }

// Observations turns records into ident's per-burst observations.
func Observations(recs []Record) []ident.Observation {
	obs := make([]ident.Observation, len(recs))
	for i, r := range recs {
		obs[i] = ident.Observation{
			Index: r.Index, StartS: r.StartS, EndS: r.EndS, Start: r.Start,
			OffsetHz: r.OffsetHz, ToneHz: r.ToneHz, LevelDB: r.LevelDB,
			Ident: r.Ident, IdentConfidence: r.IdentConfidence,
			DoubleCarrier: r.DoubleCarrier,
		}
	}
	return obs
}

// betterReading says whether identification c of one piece beats the
// best so far: more confident, or as confident with more text read.
func betterReading(c, best Record) bool {
	if c.IdentConfidence != best.IdentConfidence {
		return c.IdentConfidence > best.IdentConfidence
	}
	return len(c.Text) > len(best.Text)
}

// identify decodes the Morse of a stretch of one transmission (FM and AM
// audio at rate, its level track) and matches it to the expected IDs.
func identify(r *Record, fmAudio, amAudio []float32, rate float64, level []receiver.LevelSample, mode ident.Mode, m *ident.Matcher) {
	power, powerRate := levelPower(level)
	if mode == ident.ModeAuto {
		mode = ident.DetectMode(fmAudio, amAudio, rate, power, powerRate)
	}
	r.Mode = mode.String()
	opts := ident.DecodeOptions{Mode: mode}
	audio := fmAudio
	if mode == ident.ModeAM {
		audio = amAudio
	}
	if m != nil && mode != ident.ModeCW {
		// With a list, the template can name a burst whose text is lost.
		d, mt, err := m.MatchTone(audio, rate, opts)
		if err != nil {
			r.Warnings = append(r.Warnings, "no identifier: "+err.Error())
			return
		}
		setDecoded(r, d)
		r.Ident, r.IdentConfidence, r.IdentMethod = mt.ID, mt.Confidence, mt.Method
		r.Warnings = append(r.Warnings, mt.Warnings...)
		return
	}
	var d ident.Decoded
	var err error
	if mode == ident.ModeCW {
		d, err = ident.DecodeKeyed(power, powerRate, opts)
	} else {
		d, err = ident.DecodeTone(audio, rate, opts)
	}
	if err != nil {
		r.Warnings = append(r.Warnings, "no identifier decoded: "+err.Error())
		if m != nil && len(power) > 0 {
			// keyed carrier: the template on the power track itself
			mt := m.MatchEnvelope(power, powerRate)
			r.Ident, r.IdentConfidence, r.IdentMethod = mt.ID, mt.Confidence, mt.Method
		}
		return
	}
	setDecoded(r, d)
	if m != nil {
		mt := m.Match(d)
		r.Ident, r.IdentConfidence, r.IdentMethod = mt.ID, mt.Confidence, mt.Method
		r.Warnings = append(r.Warnings, mt.Warnings...)
		return
	}
	r.Ident, r.IdentConfidence, r.IdentMethod = repeatedWord(d)
}

// setDecoded copies what the decoder read into the record.
func setDecoded(r *Record, d ident.Decoded) {
	r.Text = d.Text
	r.ToneHz = d.ToneHz
	r.WPM = d.WPM
	r.Warnings = append(r.Warnings, d.Warnings...)
}

// repeatedWord names a burst without an ID list: the word the beacon sent
// most often, when it was sent at least twice and read with confidence.
func repeatedWord(d ident.Decoded) (string, float64, string) {
	words := strings.Fields(d.Text)
	count := map[string]int{}
	for _, w := range words {
		if len([]rune(w)) >= 3 && !strings.Contains(w, "*") {
			count[w]++
		}
	}
	best, n := "", 0
	keys := make([]string, 0, len(count))
	for k := range count {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		if count[k] > n {
			best, n = k, count[k]
		}
	}
	if n < 2 {
		return ident.UnknownIdent, 0, ""
	}
	var conf float64
	var nc int
	for _, c := range d.Chars {
		conf += c.Confidence
		nc++
	}
	if nc > 0 {
		conf /= float64(nc)
	}
	share := float64(n) / float64(len(words))
	return best, math.Min(1, conf*share), "repeated-text"
}

// levelPower returns a level track as linear power and its rate.
func levelPower(level []receiver.LevelSample) ([]float32, float64) {
	if len(level) < 2 {
		return nil, 0
	}
	p := make([]float32, len(level))
	for i, l := range level {
		p[i] = float32(math.Pow(10, l.LevelDB/10))
	}
	rate := float64(len(level)-1) / (level[len(level)-1].T - level[0].T)
	return p, rate
}

// StartTime formats a burst time for tables: UTC clock time when known.
func StartTime(t time.Time, s float64) string {
	if t.IsZero() {
		return fmt.Sprintf("%9.3f s", s)
	}
	return t.UTC().Format("15:04:05.000")
}
