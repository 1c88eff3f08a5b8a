// Package survey runs the whole listening job on one recording: the
// receiver finds the bursts, ident reads their Morse identifiers and
// names the transmitters by identifier and fingerprint. It wires packages
// together; the algorithms and the identification policy live in receiver
// and ident.
package survey

import (
	"context"
	"fmt"
	"math"
	"nullseek/ident"
	"nullseek/ident/fingerprint"
	"nullseek/ident/idmatch"
	"nullseek/ident/morse"
	"time"

	"nullseek/receiver"
	"nullseek/sdr"
)

// Options configure a survey.
type Options struct {
	Receiver receiver.Config
	// Ident says how transmissions are identified (keying mode, expected
	// identifiers, minimum confidence, fingerprint tolerances).
	Ident ident.Options
	// NoIdent skips Morse decoding (levels and timing only).
	NoIdent bool
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
}

// Result is a finished survey.
type Result struct {
	Info     sdr.Info
	Summary  receiver.Summary
	Records  []Record
	Clusters fingerprint.Result
}

// Run surveys src. progress (may be nil) gets the input samples consumed.
func Run(ctx context.Context, src sdr.Source, opts Options, progress func(int64)) (*Result, error) {
	info := src.Info()
	idf, err := ident.New(opts.Ident)
	if err != nil {
		return nil, err
	}
	rc := opts.Receiver
	rc.KeepAudio = !opts.NoIdent
	if opts.Ident.Mode == morse.ModeCW && rc.MergeGapS == 0 {
		rc.MergeGapS = 2.5 // word gaps of keyed carrier at 5 WPM stay inside one burst
	}
	sc, err := receiver.NewScanner(info, rc)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", info.Name, err)
	}
	res := &Result{Info: info}
	// Identification reads each piece of a transmission as it comes (a
	// transmission of any length is read with bounded memory) and names it
	// when its closing burst arrives.
	var tr *ident.Transmission
	h := receiver.Handler{Progress: progress}
	if !opts.NoIdent {
		h.Piece = func(p *receiver.Piece) error {
			if tr == nil {
				tr = idf.Begin()
			}
			return tr.Add(segmentOf(p))
		}
	}
	h.Burst = func(b *receiver.Burst) error {
		r := Record{Burst: *b, Ident: idmatch.Unknown}
		if tr != nil {
			r.setIdent(tr.Finish(b.CutAtStart, b.CutAtEnd))
			tr = nil
		}
		if b.DoubleCarrier {
			r.Warnings = append(r.Warnings, fmt.Sprintf("carrier stepped by %.0f Hz inside the burst: two transmitters on the air at once?", b.CarrierSpreadHz))
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
		nm, err := idf.Name(Observations(res.Records))
		if err != nil {
			return res, err
		}
		res.Clusters = nm.Clusters
		for i, a := range nm.Bursts {
			r := &res.Records[i]
			r.Transmitter = a.Transmitter
			r.Ident, r.IdentConfidence, r.IdentMethod = a.Ident, a.Confidence, a.Method
			if a.Note != "" {
				r.Warnings = append(r.Warnings, a.Note)
			}
		}
	}
	return res, nil
}

func known(id string) bool { return idmatch.Known(id) }

// setIdent copies identification's findings into the record.
func (r *Record) setIdent(b ident.Burst) {
	r.Mode = b.Mode.String()
	r.Text, r.ToneHz, r.WPM = b.Text, b.ToneHz, b.WPM
	r.Ident, r.IdentConfidence, r.IdentMethod = b.Ident, b.Confidence, b.Method
	r.Warnings = append(r.Warnings, b.Warnings...)
}

// segmentOf hands the transmission's part of a piece to identification:
// audio from 0.1 s before its start edge to 0.1 s after its end edge, the
// level track from edge to edge (as linear power).
func segmentOf(p *receiver.Piece) ident.Segment {
	seg := ident.Segment{OverlapS: p.OverlapS, Keyed: p.Keyed}
	if len(p.FMAudio) > 0 && p.ChannelRateHz > 0 {
		t0 := p.OnS - 0.1
		a0 := max(0, min(int(math.Floor((t0-p.StartS)*p.ChannelRateHz)), len(p.FMAudio)))
		seg.FM, seg.AM, _ = p.Between(t0, p.OffS+0.1)
		seg.AudioStartS, seg.AudioRateHz = p.StartS+float64(a0)/p.ChannelRateHz, p.ChannelRateHz
	}
	if _, _, level := p.Between(p.OnS, p.OffS); len(level) >= 2 {
		seg.Power = make([]float32, len(level))
		for i, l := range level {
			seg.Power[i] = float32(math.Pow(10, l.LevelDB/10))
		}
		seg.PowerStartS = level[0].T
		seg.PowerRateHz = float64(len(level)-1) / (level[len(level)-1].T - level[0].T)
	}
	return seg
}

// Observations turns records into ident's per-burst observations.
func Observations(recs []Record) []fingerprint.Observation {
	obs := make([]fingerprint.Observation, len(recs))
	for i, r := range recs {
		obs[i] = fingerprint.Observation{
			Index: r.Index, StartS: r.StartS, EndS: r.EndS, Start: r.Start,
			OffsetHz: r.OffsetHz, ToneHz: r.ToneHz, LevelDB: r.LevelDB,
			Ident: r.Ident, IdentConfidence: r.IdentConfidence, IdentMethod: r.IdentMethod,
			DoubleCarrier: r.DoubleCarrier,
		}
	}
	return obs
}

// StartTime formats a burst time for tables: UTC clock time when known.
func StartTime(t time.Time, s float64) string {
	if t.IsZero() {
		return fmt.Sprintf("%9.3f s", s)
	}
	return t.UTC().Format("15:04:05.000")
}
