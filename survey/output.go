package survey

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strings"
	"time"

	"nullseek/geo"
	"nullseek/ident/fingerprint"
	"nullseek/receiver"
)

// burstLine is the stable JSON form of a burst (`scan --json`).
type burstLine struct {
	Type            string   `json:"type"`
	Index           int      `json:"index"`
	StartS          float64  `json:"start_s"`
	EndS            float64  `json:"end_s"`
	Start           string   `json:"start,omitempty"`
	End             string   `json:"end,omitempty"`
	OffsetHz        float64  `json:"offset_hz"`
	FreqHz          *float64 `json:"freq_hz,omitempty"`
	LevelDB         float64  `json:"level_dbfs"`
	PeakDB          float64  `json:"peak_dbfs"`
	NoiseDB         float64  `json:"noise_dbfs"`
	SNRDB           *float64 `json:"snr_db"`
	Clipped         float64  `json:"clipped"`
	CutAtStart      bool     `json:"cut_at_start,omitempty"`
	CutAtEnd        bool     `json:"cut_at_end,omitempty"`
	Part            int      `json:"part,omitempty"`
	Parts           int      `json:"parts,omitempty"`
	SplitStart      bool     `json:"split_start,omitempty"`
	SplitEnd        bool     `json:"split_end,omitempty"`
	DoubleCarrier   bool     `json:"double_carrier,omitempty"`
	Mode            string   `json:"mode,omitempty"`
	Text            string   `json:"text"`
	Ident           string   `json:"ident"`
	IdentConfidence float64  `json:"ident_confidence"`
	IdentMethod     string   `json:"ident_method,omitempty"`
	ToneHz          float64  `json:"tone_hz"`
	WPM             float64  `json:"wpm,omitempty"`
	Transmitter     string   `json:"transmitter"`
	Warnings        []string `json:"warnings,omitempty"`
}

// round rounds v to digits decimals as the CSV writes them
// (geo.RoundTo), so that a JSON number and a CSV cell agree.
func round(v float64, digits int) float64 { return geo.RoundTo(v, digits) }

func rfc3339(t time.Time) string {
	if t.IsZero() {
		return ""
	}
	return t.UTC().Format("2006-01-02T15:04:05.000Z07:00")
}

// MarshalJSON writes the record as a `"type":"burst"` line.
func (r Record) MarshalJSON() ([]byte, error) {
	l := burstLine{
		Type: "burst", Index: r.Index,
		StartS: round(r.StartS, 4), EndS: round(r.EndS, 4),
		Start: rfc3339(r.Start), End: rfc3339(r.End),
		OffsetHz: round(r.OffsetHz, 1),
		LevelDB:  round(r.LevelDB, 2), PeakDB: round(r.PeakDB, 2), NoiseDB: round(r.NoiseDB, 2),
		Clipped: round(r.Clipped, 6), CutAtStart: r.CutAtStart, CutAtEnd: r.CutAtEnd,
		Part: r.Part, Parts: r.Parts, SplitStart: r.SplitStart, SplitEnd: r.SplitEnd, DoubleCarrier: r.DoubleCarrier, Mode: r.Mode, Text: r.Text, Ident: r.Ident,
		IdentConfidence: round(r.IdentConfidence, 3), IdentMethod: r.IdentMethod,
		ToneHz: round(r.ToneHz, 1), WPM: round(r.WPM, 1), Transmitter: r.Transmitter,
		Warnings: r.Warnings,
	}
	if r.FreqHz != 0 {
		f := round(r.FreqHz, 1)
		l.FreqHz = &f
	}
	if !math.IsInf(r.SNRDB, 0) && !math.IsNaN(r.SNRDB) {
		s := round(r.SNRDB, 2)
		l.SNRDB = &s
	}
	return json.Marshal(l)
}

// WriteTable prints the records as a table for people.
func (res *Result) WriteTable(w io.Writer) error {
	tw := &errWriter{w: w}
	// a start is UTC when the recording says when it began, else seconds
	// from the capture start (StartTime)
	start := "start s"
	if !res.Info.Start.IsZero() {
		start = "start UTC"
	}
	fmt.Fprintf(tw, "%-4s %-12s %7s %10s %8s %6s %5s %-12s %5s %-4s %s\n",
		"#", start, "len s", "offset Hz", "dBFS", "SNR dB", "tone", "ident", "conf", "tx", "text")
	for _, r := range res.Records {
		text := r.Text
		if len(text) > 40 {
			text = text[:37] + "..."
		}
		snr := "  -inf"
		if !math.IsInf(r.SNRDB, 0) {
			snr = fmt.Sprintf("%6.1f", r.SNRDB)
		}
		clip := ""
		if r.Clipped > 0.001 {
			clip = fmt.Sprintf("  [clipped %.1f%%]", 100*r.Clipped)
		}
		fmt.Fprintf(tw, "%-4d %-12s %7.2f %10.1f %8.1f %s %5.0f %-12s %5.2f %-4s %s%s\n",
			r.Index, StartTime(r.Start, r.StartS), r.EndS-r.StartS, r.OffsetHz, r.LevelDB, snr,
			r.ToneHz, r.Ident, r.IdentConfidence, r.Transmitter, text, clip)
	}
	for _, f := range res.Clusters.Flags {
		fmt.Fprintf(tw, "note: %s\n", f.Message)
	}
	if len(res.ListedIDs) > 0 {
		fmt.Fprintf(tw, "listed and heard: %s\n", listOrNone(res.Heard))
		fmt.Fprintf(tw, "listed, never heard: %s\n", listOrNone(res.NotHeard))
	}
	return tw.err
}

// SummaryLine is the one-line summary printed after a scan.
func (res *Result) SummaryLine(elapsed time.Duration) string {
	s := res.Summary
	var b strings.Builder
	fmt.Fprintf(&b, "%d bursts in %.1f s of %s", s.Bursts, s.DurationS, res.Info.Name)
	if s.FreqHz != 0 {
		fmt.Fprintf(&b, " at %.4f MHz", s.FreqHz/1e6)
	} else {
		fmt.Fprintf(&b, " at offset %+.0f Hz", s.OffsetHz)
	}
	fmt.Fprintf(&b, "; noise floor %.1f dBFS; %d transmitters", s.NoiseDB, len(res.Clusters.Clusters))
	if s.ClippedSamples > 0 {
		fmt.Fprintf(&b, "; %d clipped samples", s.ClippedSamples)
	}
	if elapsed > 0 && s.DurationS > 0 {
		fmt.Fprintf(&b, "; %.0f× real time", s.DurationS/elapsed.Seconds())
	}
	if s.InBurstAtStart {
		b.WriteString("; the recording starts inside a transmission (its first burst may be cut)")
	}
	return b.String()
}

type errWriter struct {
	w   io.Writer
	err error
}

func (e *errWriter) Write(p []byte) (int, error) {
	if e.err != nil {
		return 0, e.err
	}
	n, err := e.w.Write(p)
	e.err = err
	return n, err
}

func listOrNone(s []string) string {
	if len(s) == 0 {
		return "none"
	}
	return strings.Join(s, ", ")
}

// summaryLine is the closing `"type":"summary"` line of scan --json.
type summaryLine struct {
	Type         string             `json:"type"`
	Summary      receiver.Summary   `json:"summary"` // rounded as the burst lines are
	Transmitters []txSummary        `json:"transmitters"`
	Flags        []fingerprint.Flag `json:"flags"`
	Heard        []string           `json:"heard"`
	NotHeard     []string           `json:"not_heard"`
}

// txSummary is one transmitter of the summary line; "bursts" holds the
// burst lines' 1-based "index" values, so the two refer to bursts alike.
type txSummary struct {
	Label          string  `json:"label"`
	Ident          string  `json:"ident"`
	IdentShare     float64 `json:"ident_share"`
	Bursts         []int   `json:"bursts"`
	OffsetHz       float64 `json:"offset_hz"`
	OffsetSpreadHz float64 `json:"offset_spread_hz"`
	ToneHz         float64 `json:"tone_hz"`
	ToneSpreadHz   float64 `json:"tone_spread_hz"`
	FirstS         float64 `json:"first_s"`
}

// WriteJSON writes the survey as JSON lines (`scan --json`): one burst
// line per record (Record.MarshalJSON), then one "summary" line with the
// summary, the transmitters (each naming its bursts by their "index"), the
// fingerprint flags and the identifiers heard and not heard (empty lists
// as [], never null). Numbers are rounded as in the burst lines.
func (res *Result) WriteJSON(w io.Writer) error {
	enc := json.NewEncoder(w)
	for _, r := range res.Records {
		if err := enc.Encode(r); err != nil {
			return err
		}
	}
	flags := res.Clusters.Flags
	if flags == nil {
		flags = []fingerprint.Flag{}
	}
	// The summary rounded as the burst lines are: dB to 0.01, Hz to 0.1,
	// seconds to 0.1 ms.
	s := res.Summary
	s.DurationS, s.NoiseDB, s.NoiseBandwidthHz = round(s.DurationS, 4), round(s.NoiseDB, 2), round(s.NoiseBandwidthHz, 1)
	s.OffsetHz, s.FreqHz, s.ChannelRateHz = round(s.OffsetHz, 1), round(s.FreqHz, 1), round(s.ChannelRateHz, 1)
	line := summaryLine{Type: "summary", Summary: s, Transmitters: []txSummary{}, Flags: flags,
		Heard: orEmpty(res.Heard), NotHeard: orEmpty(res.NotHeard)}
	for _, c := range res.Clusters.Clusters {
		t := txSummary{Label: c.Label, Ident: c.Ident, IdentShare: round(c.IdentShare, 3), Bursts: []int{},
			OffsetHz: round(c.OffsetHz, 1), OffsetSpreadHz: round(c.OffsetSpreadHz, 1),
			ToneHz: round(c.ToneHz, 1), ToneSpreadHz: round(c.ToneSpreadHz, 1), FirstS: round(c.FirstS, 4)}
		for _, m := range c.Members {
			if m >= 0 && m < len(res.Records) {
				t.Bursts = append(t.Bursts, res.Records[m].Index)
			}
		}
		line.Transmitters = append(line.Transmitters, t)
	}
	return enc.Encode(line)
}

func orEmpty(s []string) []string {
	if s == nil {
		return []string{}
	}
	return s
}
