package watch

import (
	"time"

	"nullseek/ident/idmatch"
	"nullseek/ident/schedule"
	"nullseek/logbook"
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
	rows := logbook.ScheduleRows(plan, r.End)
	if len(rows) == 0 {
		return nil
	}
	if err := w.o.DB.PutSchedules(rows); err != nil {
		return w.dbErr(err)
	}
	return nil
}
