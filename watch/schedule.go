package watch

import (
	"math"
	"time"

	"nullseek/ident/idmatch"
	"nullseek/ident/schedule"
	"nullseek/store"
	"nullseek/survey"
)

// schedule adds the burst to the latest MaxScheduleBursts, names their
// transmitters (ident's naming, by identifier and fingerprint) and refits
// the slot schedule, stored as of the burst's end. Fewer than three bursts
// make no schedule yet (schedule.Build's minimum).
func (w *watcher) schedule(r survey.Record) error {
	r.Level, r.Fit = nil, nil // keep the record small
	if len(w.obs) == MaxScheduleBursts {
		w.obs = append(w.obs[:0], w.obs[1:]...)
	}
	w.obs = append(w.obs, r)
	if len(w.obs) < 3 || r.End.IsZero() {
		return nil
	}
	words := make([][]idmatch.Word, len(w.obs))
	for i, o := range w.obs {
		words[i] = o.Words
	}
	obs := survey.Observations(w.obs)
	nm, err := w.idf.Name(obs, words)
	if err != nil {
		w.logf("warning: no slot schedule after burst %s: %v", r.Start.UTC().Format(time.TimeOnly), err)
		return nil
	}
	labels := make([]string, len(obs))
	for i, a := range nm.Bursts {
		switch {
		case idmatch.Known(a.Ident):
			labels[i] = a.Ident
		case a.Transmitter != "":
			labels[i] = a.Transmitter
		}
	}
	opts := schedule.DefaultOptions()
	opts.NextCount = 0
	opts.CaptureStart, opts.CaptureEndS, opts.ListedIDs = w.info.Start, r.EndS, w.ch.IDs
	plan, err := schedule.Build(obs, labels, opts)
	if err != nil {
		return nil // too few usable bursts yet
	}
	rows := scheduleRows(plan, r.End)
	if len(rows) == 0 {
		return nil
	}
	if err := w.o.DB.PutSchedules(rows); err != nil {
		return w.dbErr(err)
	}
	return nil
}

// scheduleRows maps a plan to the store's rows as of asOf.
func scheduleRows(p *schedule.Plan, asOf time.Time) []store.Schedule {
	num := func(v float64) *float64 {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil
		}
		return &v
	}
	var rows []store.Schedule
	for i, t := range p.Transmitters {
		s := store.Schedule{Ident: t.ID, AsOf: asOf.UTC(), Order: i, Bursts: t.Bursts,
			PeriodS: num(t.PeriodS), PeriodSigmaS: num(t.PeriodSigmaS), DriftPPM: num(t.DriftPPM), DriftSigmaPPM: num(t.DriftSigmaPPM),
			OnS: num(t.OnS), CommonPeriodS: num(p.CommonPeriodS), Reason: t.Reason}
		if s.PeriodS != nil && !(*s.PeriodS > 0) {
			s.PeriodS = nil
		}
		if !p.CaptureStart.IsZero() && !math.IsNaN(t.T0S) && !math.IsInf(t.T0S, 0) {
			s.T0 = p.CaptureStart.Add(time.Duration(t.T0S * float64(time.Second))).UTC()
		}
		if s.Validate() != nil {
			continue // a row the store refuses is a schedule not worth keeping
		}
		rows = append(rows, s)
	}
	return rows
}
