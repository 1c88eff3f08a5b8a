package schedule

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"
)

// timeLayout is RFC 3339 in UTC with milliseconds.
const timeLayout = "2006-01-02T15:04:05.000Z07:00"

// jsonNum is a JSON number that is null when not finite, written with 7
// significant digits: 0.1 ms in a 300 s period, 0.01 ppm in a drift of
// hundreds, far finer than any of the schedule's standard errors, and no
// floating-point tail (300.0123, not 300.01230000000004).
type jsonNum float64

func (x jsonNum) MarshalJSON() ([]byte, error) {
	f := float64(x)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	r, err := strconv.ParseFloat(strconv.FormatFloat(f, 'g', 7, 64), 64)
	if err != nil {
		return nil, err
	}
	return json.Marshal(r)
}

// jsonSec is a time in seconds from the capture start as JSON: null when
// not finite, rounded to 0.1 ms (the RFC 3339 times carry 1 ms; burst edges
// are good to about a millisecond at best).
type jsonSec float64

func (x jsonSec) MarshalJSON() ([]byte, error) {
	f := float64(x)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return json.Marshal(math.Round(f*1e4) / 1e4)
}

// timeOrSeconds is an RFC 3339 time when the capture start is known, else the
// seconds from the capture start.
func timeOrSeconds(t0 time.Time, s float64) any {
	// From the seconds as written (jsonSec, 0.1 ms), so that the time and
	// the "…_s" field always agree and a plan read back writes the same.
	s = math.Round(s*1e4) / 1e4
	if at, ok := toUTC(t0, s); ok {
		return at.Format(timeLayout)
	}
	return jsonSec(s)
}

type txJSON struct {
	Ident            string             `json:"ident"`
	PeriodS          jsonNum            `json:"period_s"`
	PeriodSigmaS     jsonNum            `json:"period_sigma_s"`
	OnS              jsonNum            `json:"on_s"`
	GapS             jsonNum            `json:"gap_s"`
	DriftPPM         jsonNum            `json:"drift_ppm"`
	NextOn           []any              `json:"next_on"`
	NextOnS          []jsonSec          `json:"next_on_s"`
	NextOnSigmaS     []jsonNum          `json:"next_on_sigma_s"`
	DriftSigmaPPM    jsonNum            `json:"drift_sigma_ppm"`
	RelativeDriftPPM map[string]jsonNum `json:"relative_drift_ppm,omitempty"`
	OnSigmaS         jsonNum            `json:"on_sigma_s"`
	PhaseS           jsonSec            `json:"phase_s"`
	T0S              jsonSec            `json:"t0_s"`
	ResidualRMSS     jsonNum            `json:"residual_rms_s"`
	Bursts           int                `json:"bursts"`
	FitBursts        int                `json:"fit_bursts"`
	Rejected         int                `json:"rejected"`
	Reason           string             `json:"reason,omitempty"`
}

type collisionJSON struct {
	A                string  `json:"a"`
	B                string  `json:"b"`
	At               any     `json:"at"`
	AtS              jsonSec `json:"at_s"`
	SigmaS           jsonNum `json:"sigma_s"`
	Cycles           jsonNum `json:"cycles"`
	ClosingSPerCycle jsonNum `json:"closing_s_per_cycle"`
	ClosingSigmaS    jsonNum `json:"closing_sigma_s"`
	Significant      bool    `json:"significant"`
	Already          bool    `json:"already"`
}

type overlapJSON struct {
	A      string  `json:"a"`
	B      string  `json:"b"`
	IndexA int     `json:"index_a"`
	IndexB int     `json:"index_b"`
	Start  any     `json:"start"`
	StartS jsonSec `json:"start_s"`
	EndS   jsonSec `json:"end_s"`
	Source string  `json:"source"`
}

type planJSON struct {
	Type            string          `json:"type"`
	Order           []string        `json:"order"`
	Transmitters    []txJSON        `json:"transmitters"`
	Collisions      []collisionJSON `json:"collisions"`
	Overlaps        []overlapJSON   `json:"overlaps"`
	CommonPeriodS   jsonNum         `json:"common_period_s"`
	DriftReference  string          `json:"drift_reference"`
	DriftReferenceS jsonNum         `json:"drift_reference_s"`
	CaptureStart    *string         `json:"capture_start"`
	EndS            jsonSec         `json:"end_s"`
	NominalPeriodS  jsonNum         `json:"nominal_period_s,omitempty"`
	NominalFits     *bool           `json:"nominal_fits,omitempty"`
	NominalMisfit   string          `json:"nominal_misfit,omitempty"`
	Heard           []string        `json:"heard"`
	NotHeard        []string        `json:"not_heard"`
	Notes           []string        `json:"notes,omitempty"`
}

// MarshalJSON writes the plan as
//
//	{"type": "schedule", "order": [id…],
//	 "transmitters": [{"ident": id, "period_s", "period_sigma_s", "on_s",
//	                   "gap_s", "drift_ppm", "next_on": [time…], …}],
//	 "collisions": [{"a", "b", "at", "at_s", …}], "overlaps": […], …}
//
// Times ("next_on", "at", "start") are RFC 3339 UTC strings when the capture
// start is known, else seconds from the capture start; "…_s" fields are
// always seconds. Quantities that could not be estimated are null; numbers
// carry 7 significant digits (jsonNum). Lists are [] rather than null when
// empty; "transmitters" is a list in the plan's order, like every list of
// transmitters nullseek writes.
func (p *Plan) MarshalJSON() ([]byte, error) {
	out := planJSON{
		Type:            "schedule",
		Order:           p.Order,
		Transmitters:    []txJSON{},
		Collisions:      []collisionJSON{},
		Overlaps:        []overlapJSON{},
		CommonPeriodS:   jsonNum(p.CommonPeriodS),
		DriftReference:  p.DriftReference,
		DriftReferenceS: jsonNum(p.DriftReferenceS),
		EndS:            jsonSec(p.EndS),
		NominalMisfit:   p.NominalMisfit,
		Heard:           append([]string{}, p.Heard...),
		NotHeard:        append([]string{}, p.NotHeard...),
		Notes:           p.Notes,
	}
	if p.NominalPeriodS > 0 {
		fits := p.NominalFits
		out.NominalPeriodS, out.NominalFits = jsonNum(p.NominalPeriodS), &fits
	}
	if out.Order == nil {
		out.Order = []string{}
	}
	if !p.CaptureStart.IsZero() {
		s := p.CaptureStart.UTC().Format(timeLayout)
		out.CaptureStart = &s
	}
	for _, t := range p.Transmitters {
		j := txJSON{
			Ident:   t.ID,
			PeriodS: jsonNum(t.PeriodS), PeriodSigmaS: jsonNum(t.PeriodSigmaS),
			OnS: jsonNum(t.OnS), GapS: jsonNum(t.GapS), DriftPPM: jsonNum(t.DriftPPM),
			NextOn: []any{}, NextOnS: []jsonSec{}, NextOnSigmaS: []jsonNum{},
			DriftSigmaPPM: jsonNum(t.DriftSigmaPPM), OnSigmaS: jsonNum(t.OnSigmaS),
			PhaseS: jsonSec(t.PhaseS), T0S: jsonSec(t.T0S), ResidualRMSS: jsonNum(t.ResidualRMSS),
			Bursts: t.Bursts, FitBursts: t.FitBursts, Rejected: t.Rejected, Reason: t.Reason,
		}
		for i, s := range t.NextOnS {
			j.NextOn = append(j.NextOn, timeOrSeconds(p.CaptureStart, s))
			j.NextOnS = append(j.NextOnS, jsonSec(s))
			j.NextOnSigmaS = append(j.NextOnSigmaS, jsonNum(t.NextOnSigmaS[i]))
		}
		if len(t.RelativeDriftPPM) > 0 {
			j.RelativeDriftPPM = map[string]jsonNum{}
			for k, v := range t.RelativeDriftPPM {
				j.RelativeDriftPPM[k] = jsonNum(v)
			}
		}
		out.Transmitters = append(out.Transmitters, j)
	}
	for _, c := range p.Collisions {
		out.Collisions = append(out.Collisions, collisionJSON{
			A: c.A, B: c.B, At: timeOrSeconds(p.CaptureStart, c.AtS), AtS: jsonSec(c.AtS),
			SigmaS: jsonNum(c.SigmaS), Cycles: jsonNum(c.Cycles),
			ClosingSPerCycle: jsonNum(c.ClosingSPerCycle), ClosingSigmaS: jsonNum(c.ClosingSigmaS),
			Significant: c.Significant, Already: c.Already,
		})
	}
	for _, o := range p.Overlaps {
		out.Overlaps = append(out.Overlaps, overlapJSON{
			A: o.A, B: o.B, IndexA: o.IndexA, IndexB: o.IndexB,
			Start: timeOrSeconds(p.CaptureStart, o.StartS), StartS: jsonSec(o.StartS), EndS: jsonSec(o.EndS),
			Source: o.Source,
		})
	}
	return json.Marshal(out)
}

// fmtNextSigma is a next start's 1σ in seconds as both of the table's
// places print it.
func fmtNextSigma(s float64) string { return fmtNum(s, "%.3f") }

// WriteTable writes the plan for people: the cycle order, one row per
// transmitter, then forecast collisions, overlaps seen and notes.
func (p *Plan) WriteTable(w io.Writer) error {
	ew := &errWriter{w: w}
	fmt.Fprintf(ew, "cycle order: %s\n", strings.Join(p.Order, " > "))
	if p.NominalMisfit != "" {
		fmt.Fprintf(ew, "MISFIT: %s\n", p.NominalMisfit)
	}
	fmt.Fprintf(ew, "common cycle: %s s   drift against: %s\n", fmtNum(p.CommonPeriodS, "%.3f"), p.DriftReference)
	if !p.CaptureStart.IsZero() {
		fmt.Fprintf(ew, "capture start: %s   end: +%.1f s\n", p.CaptureStart.UTC().Format(timeLayout), p.EndS)
	}
	fmt.Fprintln(ew)
	tw := tabwriter.NewWriter(ew, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "transmitter\tbursts\tperiod s\t± s\ton s\tgap s\tdrift ppm\t± ppm\tnext on (UTC)\t± s\t")
	for _, t := range p.Transmitters {
		next, nsig := "-", "-"
		if len(t.NextOnS) > 0 {
			if len(t.NextOn) > 0 && !t.NextOn[0].IsZero() {
				next = t.NextOn[0].UTC().Format("15:04:05.0")
			} else {
				next = fmt.Sprintf("+%.1f", t.NextOnS[0])
			}
			nsig = fmtNextSigma(t.NextOnSigmaS[0])
		}
		fmt.Fprintf(tw, "%s\t%d\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t\n", t.ID, t.Bursts,
			fmtNum(t.PeriodS, "%.4f"), fmtNum(t.PeriodSigmaS, "%.4f"), fmtNum(t.OnS, "%.1f"),
			fmtNum(t.GapS, "%.2f"), fmtNum(t.DriftPPM, "%+.1f"), fmtNum(t.DriftSigmaPPM, "%.1f"), next, nsig)
	}
	tw.Flush()
	for _, t := range p.Transmitters {
		if t.Reason != "" {
			fmt.Fprintf(ew, "  %s: %s\n", t.ID, t.Reason)
		}
	}
	more := false
	for _, t := range p.Transmitters {
		more = more || len(t.NextOnS) > 1
	}
	if more {
		fmt.Fprintln(ew, "\nnext on (UTC, or s from the capture start; ± 1σ in s):")
		for _, t := range p.Transmitters {
			if len(t.NextOnS) == 0 {
				continue
			}
			var at []string
			for i, s := range t.NextOnS {
				when := fmt.Sprintf("+%.1f s", s)
				if i < len(t.NextOn) && !t.NextOn[i].IsZero() {
					when = t.NextOn[i].UTC().Format("15:04:05.0")
				}
				at = append(at, fmt.Sprintf("%s ± %s", when, fmtNextSigma(t.NextOnSigmaS[i])))
			}
			fmt.Fprintf(ew, "  %s: %s\n", t.ID, strings.Join(at, ", "))
		}
	}
	if len(p.Heard)+len(p.NotHeard) > 0 {
		fmt.Fprintf(ew, "\nlisted and heard: %s\n", listOrNone(p.Heard))
		fmt.Fprintf(ew, "listed, never heard: %s\n", listOrNone(p.NotHeard))
	}
	if len(p.Collisions) > 0 {
		fmt.Fprintln(ew, "\nslots running into each other:")
		for _, c := range p.Collisions {
			when := fmt.Sprintf("+%.1f s", c.AtS)
			if !c.At.IsZero() {
				when = c.At.Format(timeLayout)
			}
			state := fmt.Sprintf("in %.1f cycles", c.Cycles)
			if c.Already {
				state = "already during the recording"
			}
			weak := ""
			if !c.Significant {
				weak = " (drift difference within noise)"
			}
			fmt.Fprintf(ew, "  %s end meets %s start at %s ± %.0f s, %s; gap closes %.1f ms/cycle%s\n",
				c.A, c.B, when, c.SigmaS, state, c.ClosingSPerCycle*1e3, weak)
		}
	}
	if len(p.Overlaps) > 0 {
		fmt.Fprintln(ew, "\non the air together during the recording:")
		for _, o := range p.Overlaps {
			fmt.Fprintf(ew, "  %s (burst %d) and %s at +%.1f…%.1f s [%s]\n", o.A, o.IndexA, o.B, o.StartS, o.EndS, o.Source)
		}
	}
	if len(p.Notes) > 0 {
		fmt.Fprintln(ew, "\nnotes:")
		for _, n := range p.Notes {
			fmt.Fprintf(ew, "  %s\n", n)
		}
	}
	return ew.err
}

func listOrNone(s []string) string {
	if len(s) == 0 {
		return "none"
	}
	return strings.Join(s, ", ")
}

func fmtNum(x float64, f string) string {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return "-"
	}
	return fmt.Sprintf(f, x)
}

type errWriter struct {
	w   io.Writer
	err error
}

func (e *errWriter) Write(b []byte) (int, error) {
	if e.err != nil {
		return 0, e.err
	}
	n, err := e.w.Write(b)
	e.err = err
	return n, err
}
