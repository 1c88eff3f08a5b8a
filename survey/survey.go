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
	// Part and Parts number the parts of a burst split by fingerprint (two
	// transmitters on the air together): part Part of Parts (0 and 0 for a
	// burst read whole). SplitStart and SplitEnd say the edge is where it
	// was split, not the transmitter's own.
	Part, Parts          int
	SplitStart, SplitEnd bool
	Warnings             []string
	// Words are the decoded words with the chance each was read right,
	// for naming transmitters without a list (not in the JSON line).
	Words []idmatch.Word
	// AlsoHeard are further listed IDs read whole in the burst: two
	// transmitters on the air together that their fingerprints could not
	// tell apart. Such a burst names neither's edges.
	AlsoHeard []string
	// Fit is the burst's bearing fitted during the scan (Options.Bearing);
	// nil without a plan.
	Fit *BurstFit
}

// Result is a finished survey.
type Result struct {
	// ListedIDs are the expected identifiers the survey was given; Heard
	// and NotHeard split them into those named on a burst and those never
	// heard (in list order).
	ListedIDs, Heard, NotHeard []string
	Info                       sdr.Info
	Summary                    receiver.Summary
	Records                    []Record
	Clusters                   fingerprint.Result
}

// Run surveys src. progress (may be nil) gets the input samples consumed.
func Run(ctx context.Context, src sdr.Source, opts Options, progress func(int64)) (*Result, error) {
	idf, err := ident.New(opts.Ident)
	if err != nil {
		return nil, err
	}
	res := &Result{Info: src.Info(), ListedIDs: idf.Options().IDs}
	sum, err := stream(ctx, src, opts, idf, StreamHandler{
		Progress: progress,
		Record:   func(r Record) error { res.Records = append(res.Records, r); return nil },
	})
	res.Summary = sum
	if err != nil {
		return res, err // the source's errors name it already
	}
	if len(res.Records) > 0 && !opts.NoIdent {
		words := make([][]idmatch.Word, len(res.Records))
		for i, r := range res.Records {
			words[i] = r.Words
		}
		nm, err := idf.Name(Observations(res.Records), words)
		if err != nil {
			return res, err
		}
		res.Clusters = nm.Clusters
		res.Heard, res.NotHeard = nm.Heard, nm.NotHeard
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

// StreamHandler receives what Stream finds. Every field may be nil.
type StreamHandler struct {
	// Record is called with every record as soon as its burst has ended
	// (two for a burst split by fingerprint), identified from its own
	// Morse only: naming across bursts (Identifier.Name, which Run does at
	// the end) has not happened, so Transmitter is empty.
	Record func(Record) error
	// Piece is called with every piece of every burst before
	// identification and the bearing fit read it (receiver.Piece: the
	// piece is the scanner's; copy what you keep).
	Piece func(*receiver.Piece) error
	// Progress gets the input samples consumed.
	Progress func(int64)
	// Reading gets every reading kept for an open burst as it is taken,
	// and Channel the channel's state after every block
	// (receiver.Handler.Reading and Channel).
	Reading func(receiver.LevelSample) error
	Channel func(receiver.ChannelState) error
}

// Stream surveys src and hands each record over as its burst ends,
// keeping nothing between bursts: a stream of any length is surveyed with
// the receiver's bounded memory. It is Run without the naming at the end;
// Run is Stream collecting the records.
func Stream(ctx context.Context, src sdr.Source, opts Options, h StreamHandler) (receiver.Summary, error) {
	idf, err := ident.New(opts.Ident)
	if err != nil {
		return receiver.Summary{}, err
	}
	return stream(ctx, src, opts, idf, h)
}

func stream(ctx context.Context, src sdr.Source, opts Options, idf *ident.Identifier, sh StreamHandler) (receiver.Summary, error) {
	info := src.Info()
	rc := opts.Receiver
	rc.KeepAudio = !opts.NoIdent
	if opts.Ident.Mode == morse.ModeCW && rc.MergeGapS == 0 {
		rc.MergeGapS = receiver.KeyedMergeGapS
	}
	sc, err := receiver.NewScanner(info, rc)
	if err != nil {
		return receiver.Summary{}, fmt.Errorf("%s: %w", info.Name, err)
	}
	emit := sh.Record
	if emit == nil {
		emit = func(Record) error { return nil }
	}
	// Identification reads each piece of a transmission as it comes (a
	// transmission of any length is read with bounded memory) and names it
	// when its closing burst arrives.
	var tr *ident.Transmission
	h := receiver.Handler{Progress: sh.Progress, Reading: sh.Reading, Channel: sh.Channel}
	var fit *bearingScan
	if opts.Bearing != nil {
		if fit, err = newBearingScan(*opts.Bearing); err != nil {
			return receiver.Summary{}, err
		}
	}
	if !opts.NoIdent || fit != nil || sh.Piece != nil {
		h.Piece = func(p *receiver.Piece) error {
			if sh.Piece != nil {
				if err := sh.Piece(p); err != nil {
					return err
				}
			}
			if fit != nil {
				fit.piece(p)
			}
			if opts.NoIdent {
				return nil
			}
			if tr == nil {
				tr = idf.Begin()
			}
			return tr.Add(segmentOf(p))
		}
	}
	h.Burst = func(b *receiver.Burst) error {
		r := Record{Burst: *b, Ident: idmatch.Unknown}
		// The audio has done its job; keep the record small.
		r.FMAudio, r.AMAudio = nil, nil
		if fit != nil {
			r.Fit = fit.finish(b)
		}
		var parts []ident.Part
		if tr != nil {
			var whole ident.Burst
			whole, parts = tr.Finish(b.CutAtStart, b.CutAtEnd)
			r.setIdent(whole)
			tr = nil
		}
		if len(parts) > 1 {
			// Two transmitters on the air together, told apart by their
			// fingerprints: one record each.
			for i, p := range parts {
				if err := emit(partRecord(r, p, i, len(parts), sc.OffsetHz())); err != nil {
					return err
				}
			}
			return nil
		}
		if b.DoubleCarrier {
			r.Warnings = append(r.Warnings, fmt.Sprintf("carrier stepped by %.0f Hz inside the burst: two transmitters on the air at once?", b.CarrierSpreadHz))
		}
		return emit(r)
	}
	return sc.Scan(ctx, src, h)
}

func known(id string) bool { return idmatch.Known(id) }

// partRecord is the record of part i of n of a burst split by fingerprint:
// the burst's record with the part's times, carrier offset (channelHz is
// the channel's offset from the capture centre) and identification; an
// edge where the burst was split is marked (SplitStart, SplitEnd), and
// only the first part keeps the cut by the recording's start, the last
// the cut by its end.
func partRecord(r Record, p ident.Part, i, n int, channelHz float64) Record {
	q := r
	q.Warnings = nil
	q.Part, q.Parts = i+1, n
	q.StartS, q.EndS = math.Max(p.StartS, r.StartS), math.Min(p.EndS, r.EndS)
	if !r.Start.IsZero() {
		q.Start = r.Start.Add(time.Duration((q.StartS - r.StartS) * float64(time.Second)))
		q.End = r.Start.Add(time.Duration((q.EndS - r.StartS) * float64(time.Second)))
	}
	if !math.IsNaN(p.OffsetHz) {
		q.OffsetHz = channelHz + p.OffsetHz
	}
	q.SplitStart, q.SplitEnd = p.SplitStart, p.SplitEnd
	q.CutAtStart = r.CutAtStart && i == 0
	q.CutAtEnd = r.CutAtEnd && i == n-1
	q.DoubleCarrier = false
	var lv []receiver.LevelSample
	for _, l := range r.Level {
		if l.T >= q.StartS && l.T <= q.EndS {
			lv = append(lv, l)
		}
	}
	q.Level = lv
	q.setIdent(p.Burst)
	return q
}

// setIdent copies identification's findings into the record.
func (r *Record) setIdent(b ident.Burst) {
	r.Mode = b.Mode.String()
	r.Text, r.ToneHz, r.WPM = b.Text, b.ToneHz, b.WPM
	r.Ident, r.IdentConfidence, r.IdentMethod = b.Ident, b.Confidence, b.Method
	r.Words = b.Words
	r.AlsoHeard = b.AlsoHeard
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
			CutStart: r.CutAtStart || r.SplitStart, CutEnd: r.CutAtEnd || r.SplitEnd,
			DoubleCarrier: r.DoubleCarrier,
		}
		if len(r.AlsoHeard) > 0 {
			// Two transmitters in one burst: its edges are not one
			// transmitter's, and it makes no transmitter of its own.
			obs[i].DoubleCarrier, obs[i].CutStart, obs[i].CutEnd = true, true, true
			obs[i].OtherIdent = r.AlsoHeard[0]
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
