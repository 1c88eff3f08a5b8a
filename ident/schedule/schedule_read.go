package schedule

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"time"
)

// UnmarshalJSON reads null as NaN (MarshalJSON writes a non-finite
// number as null).
func (x *jsonNum) UnmarshalJSON(b []byte) error {
	if string(bytes.TrimSpace(b)) == "null" {
		*x = jsonNum(math.NaN())
		return nil
	}
	var f float64
	if err := json.Unmarshal(b, &f); err != nil {
		return err
	}
	*x = jsonNum(f)
	return nil
}

// UnmarshalJSON reads null as NaN, like jsonNum's.
func (x *jsonSec) UnmarshalJSON(b []byte) error {
	var n jsonNum
	if err := n.UnmarshalJSON(b); err != nil {
		return err
	}
	*x = jsonSec(n)
	return nil
}

// ReadPlanJSON reads a plan written by Plan.MarshalJSON (`nullseek slots
// --json`) back: every field that the JSON carries, with times rebuilt
// from the "…_s" seconds and the capture start exactly as Build makes
// them. The fit covariances (Transmitter.CovT0P) are not in the JSON and
// stay zero. A transmitter named in "order" but missing from
// "transmitters" (or the reverse) is an error, as is trailing data.
func ReadPlanJSON(r io.Reader) (*Plan, error) {
	dec := json.NewDecoder(r)
	var j planJSON
	if err := dec.Decode(&j); err != nil {
		return nil, fmt.Errorf("slot plan JSON: %w", err)
	}
	if _, err := dec.Token(); err != io.EOF {
		return nil, fmt.Errorf("slot plan JSON: more than one JSON value")
	}
	if j.Type != "schedule" || j.Transmitters == nil {
		return nil, fmt.Errorf(`slot plan JSON: not a "type":"schedule" object with "transmitters" (not the output of slots --json?)`)
	}
	byID := map[string]txJSON{}
	for _, t := range j.Transmitters {
		if _, dup := byID[t.Ident]; dup {
			return nil, fmt.Errorf(`slot plan JSON: %q is twice in "transmitters"`, t.Ident)
		}
		byID[t.Ident] = t
	}
	p := &Plan{
		Order: j.Order, CommonPeriodS: float64(j.CommonPeriodS), DriftReference: j.DriftReference,
		DriftReferenceS: float64(j.DriftReferenceS), EndS: float64(j.EndS), NominalPeriodS: float64(j.NominalPeriodS),
		NominalMisfit: j.NominalMisfit, Heard: j.Heard, NotHeard: j.NotHeard, Notes: j.Notes,
	}
	if j.NominalFits != nil {
		p.NominalFits = *j.NominalFits
	}
	if j.CaptureStart != nil {
		t, err := time.Parse(time.RFC3339Nano, *j.CaptureStart)
		if err != nil {
			return nil, fmt.Errorf("slot plan JSON: capture_start: %w", err)
		}
		p.CaptureStart = t.UTC()
	}
	at := func(s float64) time.Time {
		t, _ := toUTC(p.CaptureStart, s)
		return t
	}
	if len(j.Order) != len(j.Transmitters) {
		return nil, fmt.Errorf(`slot plan JSON: "order" names %d transmitters, "transmitters" holds %d`, len(j.Order), len(j.Transmitters))
	}
	for _, id := range j.Order {
		t, ok := byID[id]
		if !ok {
			return nil, fmt.Errorf(`slot plan JSON: %q is in "order" but not in "transmitters"`, id)
		}
		if len(t.NextOnSigmaS) != len(t.NextOnS) {
			return nil, fmt.Errorf(`slot plan JSON: %q: "next_on_s" and "next_on_sigma_s" differ in length`, id)
		}
		tx := Transmitter{
			ID: id, Bursts: t.Bursts, FitBursts: t.FitBursts, Rejected: t.Rejected,
			PeriodS: float64(t.PeriodS), PeriodSigmaS: float64(t.PeriodSigmaS), T0S: float64(t.T0S),
			ResidualRMSS: float64(t.ResidualRMSS), OnS: float64(t.OnS), OnSigmaS: float64(t.OnSigmaS),
			GapS: float64(t.GapS), PhaseS: float64(t.PhaseS), DriftPPM: float64(t.DriftPPM),
			DriftSigmaPPM: float64(t.DriftSigmaPPM), Reason: t.Reason,
		}
		if len(t.RelativeDriftPPM) > 0 {
			tx.RelativeDriftPPM = map[string]float64{}
			for k, v := range t.RelativeDriftPPM {
				tx.RelativeDriftPPM[k] = float64(v)
			}
		}
		for i, s := range t.NextOnS {
			tx.NextOnS = append(tx.NextOnS, float64(s))
			tx.NextOnSigmaS = append(tx.NextOnSigmaS, float64(t.NextOnSigmaS[i]))
			if !p.CaptureStart.IsZero() {
				tx.NextOn = append(tx.NextOn, at(float64(s)))
			}
		}
		p.Transmitters = append(p.Transmitters, tx)
	}
	for _, c := range j.Collisions {
		p.Collisions = append(p.Collisions, Collision{A: c.A, B: c.B, AtS: float64(c.AtS), At: at(float64(c.AtS)),
			Cycles: float64(c.Cycles), SigmaS: float64(c.SigmaS), ClosingSPerCycle: float64(c.ClosingSPerCycle),
			ClosingSigmaS: float64(c.ClosingSigmaS), Significant: c.Significant, Already: c.Already})
	}
	for _, o := range j.Overlaps {
		p.Overlaps = append(p.Overlaps, Overlap{A: o.A, B: o.B, IndexA: o.IndexA, IndexB: o.IndexB,
			StartS: float64(o.StartS), EndS: float64(o.EndS), Start: at(float64(o.StartS)), Source: o.Source})
	}
	return p, nil
}
