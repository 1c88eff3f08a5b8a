package ident

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strings"
	"text/tabwriter"
	"time"
)

// schedTimeLayout is RFC 3339 in UTC with milliseconds.
const schedTimeLayout = "2006-01-02T15:04:05.000Z07:00"

// schedNum is a JSON number that is null when not finite.
type schedNum float64

func (x schedNum) MarshalJSON() ([]byte, error) {
	f := float64(x)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return json.Marshal(f)
}

// schedWhen is an RFC 3339 time when the capture start is known, else the
// seconds from the capture start.
func schedWhen(t0 time.Time, s float64) any {
	if at, ok := schedUTC(t0, s); ok {
		return at.Format(schedTimeLayout)
	}
	return schedNum(s)
}

type schedTxJSON struct {
	PeriodS          schedNum            `json:"period_s"`
	PeriodSigmaS     schedNum            `json:"period_sigma_s"`
	OnS              schedNum            `json:"on_s"`
	GapS             schedNum            `json:"gap_s"`
	DriftPPM         schedNum            `json:"drift_ppm"`
	NextOn           []any               `json:"next_on"`
	NextOnS          []schedNum          `json:"next_on_s"`
	NextOnSigmaS     []schedNum          `json:"next_on_sigma_s"`
	DriftSigmaPPM    schedNum            `json:"drift_sigma_ppm"`
	RelativeDriftPPM map[string]schedNum `json:"relative_drift_ppm,omitempty"`
	OnSigmaS         schedNum            `json:"on_sigma_s"`
	PhaseS           schedNum            `json:"phase_s"`
	T0S              schedNum            `json:"t0_s"`
	ResidualRMSS     schedNum            `json:"residual_rms_s"`
	Bursts           int                 `json:"bursts"`
	FitBursts        int                 `json:"fit_bursts"`
	Rejected         int                 `json:"rejected"`
	Reason           string              `json:"reason,omitempty"`
}

type schedCollisionJSON struct {
	A                string   `json:"a"`
	B                string   `json:"b"`
	At               any      `json:"at"`
	AtS              schedNum `json:"at_s"`
	SigmaS           schedNum `json:"sigma_s"`
	Cycles           schedNum `json:"cycles"`
	ClosingSPerCycle schedNum `json:"closing_s_per_cycle"`
	ClosingSigmaS    schedNum `json:"closing_sigma_s"`
	Significant      bool     `json:"significant"`
	Already          bool     `json:"already"`
}

type schedOverlapJSON struct {
	A      string   `json:"a"`
	B      string   `json:"b"`
	IndexA int      `json:"index_a"`
	IndexB int      `json:"index_b"`
	Start  any      `json:"start"`
	StartS schedNum `json:"start_s"`
	EndS   schedNum `json:"end_s"`
	Source string   `json:"source"`
}

type schedPlanJSON struct {
	Order           []string               `json:"order"`
	Transmitters    map[string]schedTxJSON `json:"transmitters"`
	Collisions      []schedCollisionJSON   `json:"collisions"`
	Overlaps        []schedOverlapJSON     `json:"overlaps"`
	CommonPeriodS   schedNum               `json:"common_period_s"`
	DriftReference  string                 `json:"drift_reference"`
	DriftReferenceS schedNum               `json:"drift_reference_s"`
	CaptureStart    *string                `json:"capture_start"`
	EndS            schedNum               `json:"end_s"`
	Notes           []string               `json:"notes,omitempty"`
}

// MarshalJSON writes the plan as
//
//	{"order": [id…],
//	 "transmitters": {id: {"period_s", "period_sigma_s", "on_s", "gap_s",
//	                       "drift_ppm", "next_on": [time…], …}},
//	 "collisions": [{"a", "b", "at", "at_s", …}], "overlaps": […], …}
//
// Times ("next_on", "at", "start") are RFC 3339 UTC strings when the capture
// start is known, else seconds from the capture start; "…_s" fields are
// always seconds. Quantities that could not be estimated are null. Lists are
// [] rather than null when empty.
func (p *SlotPlan) MarshalJSON() ([]byte, error) {
	out := schedPlanJSON{
		Order:           p.Order,
		Transmitters:    map[string]schedTxJSON{},
		Collisions:      []schedCollisionJSON{},
		Overlaps:        []schedOverlapJSON{},
		CommonPeriodS:   schedNum(p.CommonPeriodS),
		DriftReference:  p.DriftReference,
		DriftReferenceS: schedNum(p.DriftReferenceS),
		EndS:            schedNum(p.EndS),
		Notes:           p.Notes,
	}
	if out.Order == nil {
		out.Order = []string{}
	}
	if !p.CaptureStart.IsZero() {
		s := p.CaptureStart.UTC().Format(schedTimeLayout)
		out.CaptureStart = &s
	}
	for _, t := range p.Transmitters {
		j := schedTxJSON{
			PeriodS: schedNum(t.PeriodS), PeriodSigmaS: schedNum(t.PeriodSigmaS),
			OnS: schedNum(t.OnS), GapS: schedNum(t.GapS), DriftPPM: schedNum(t.DriftPPM),
			NextOn: []any{}, NextOnS: []schedNum{}, NextOnSigmaS: []schedNum{},
			DriftSigmaPPM: schedNum(t.DriftSigmaPPM), OnSigmaS: schedNum(t.OnSigmaS),
			PhaseS: schedNum(t.PhaseS), T0S: schedNum(t.T0S), ResidualRMSS: schedNum(t.ResidualRMSS),
			Bursts: t.Bursts, FitBursts: t.FitBursts, Rejected: t.Rejected, Reason: t.Reason,
		}
		for i, s := range t.NextOnS {
			j.NextOn = append(j.NextOn, schedWhen(p.CaptureStart, s))
			j.NextOnS = append(j.NextOnS, schedNum(s))
			j.NextOnSigmaS = append(j.NextOnSigmaS, schedNum(t.NextOnSigmaS[i]))
		}
		if len(t.RelativeDriftPPM) > 0 {
			j.RelativeDriftPPM = map[string]schedNum{}
			for k, v := range t.RelativeDriftPPM {
				j.RelativeDriftPPM[k] = schedNum(v)
			}
		}
		out.Transmitters[t.ID] = j
	}
	for _, c := range p.Collisions {
		out.Collisions = append(out.Collisions, schedCollisionJSON{
			A: c.A, B: c.B, At: schedWhen(p.CaptureStart, c.AtS), AtS: schedNum(c.AtS),
			SigmaS: schedNum(c.SigmaS), Cycles: schedNum(c.Cycles),
			ClosingSPerCycle: schedNum(c.ClosingSPerCycle), ClosingSigmaS: schedNum(c.ClosingSigmaS),
			Significant: c.Significant, Already: c.Already,
		})
	}
	for _, o := range p.Overlaps {
		out.Overlaps = append(out.Overlaps, schedOverlapJSON{
			A: o.A, B: o.B, IndexA: o.IndexA, IndexB: o.IndexB,
			Start: schedWhen(p.CaptureStart, o.StartS), StartS: schedNum(o.StartS), EndS: schedNum(o.EndS),
			Source: o.Source,
		})
	}
	return json.Marshal(out)
}

// WriteTable writes the plan for people: the cycle order, one row per
// transmitter, then forecast collisions, overlaps seen and notes.
func (p *SlotPlan) WriteTable(w io.Writer) error {
	ew := &schedErrWriter{w: w}
	fmt.Fprintf(ew, "cycle order: %s\n", strings.Join(p.Order, " > "))
	fmt.Fprintf(ew, "common cycle: %s s   drift against: %s\n", schedFmt(p.CommonPeriodS, "%.3f"), p.DriftReference)
	if !p.CaptureStart.IsZero() {
		fmt.Fprintf(ew, "capture start: %s   end: +%.1f s\n", p.CaptureStart.UTC().Format(schedTimeLayout), p.EndS)
	}
	fmt.Fprintln(ew)
	tw := tabwriter.NewWriter(ew, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "transmitter\tbursts\tperiod s\t± s\ton s\tgap s\tdrift ppm\t± ppm\tnext on\t± s\t")
	for _, t := range p.Transmitters {
		next, nsig := "-", "-"
		if len(t.NextOnS) > 0 {
			if len(t.NextOn) > 0 && !t.NextOn[0].IsZero() {
				next = t.NextOn[0].Format("15:04:05.0")
			} else {
				next = fmt.Sprintf("+%.1f", t.NextOnS[0])
			}
			nsig = fmt.Sprintf("%.3f", t.NextOnSigmaS[0])
		}
		fmt.Fprintf(tw, "%s\t%d\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t\n", t.ID, t.Bursts,
			schedFmt(t.PeriodS, "%.4f"), schedFmt(t.PeriodSigmaS, "%.4f"), schedFmt(t.OnS, "%.1f"),
			schedFmt(t.GapS, "%.2f"), schedFmt(t.DriftPPM, "%+.1f"), schedFmt(t.DriftSigmaPPM, "%.1f"), next, nsig)
	}
	tw.Flush()
	for _, t := range p.Transmitters {
		if t.Reason != "" {
			fmt.Fprintf(ew, "  %s: %s\n", t.ID, t.Reason)
		}
	}
	if len(p.Collisions) > 0 {
		fmt.Fprintln(ew, "\nslots running into each other:")
		for _, c := range p.Collisions {
			when := fmt.Sprintf("+%.1f s", c.AtS)
			if !c.At.IsZero() {
				when = c.At.Format(schedTimeLayout)
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

func schedFmt(x float64, f string) string {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return "-"
	}
	return fmt.Sprintf(f, x)
}

type schedErrWriter struct {
	w   io.Writer
	err error
}

func (e *schedErrWriter) Write(b []byte) (int, error) {
	if e.err != nil {
		return 0, e.err
	}
	n, err := e.w.Write(b)
	e.err = err
	return n, err
}
