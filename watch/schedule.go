package watch

import (
	"fmt"
	"time"

	"nullseek/ident/idmatch"
	"nullseek/ident/schedule"
	"nullseek/logbook"
	"nullseek/survey"
)

// schedule adds the burst to the channel's latest MaxScheduleBursts, names
// their transmitters (ident's naming, by identifier and fingerprint) and
// refits the channel's slot schedule, stored as of the burst's end with
// the channel's frequency. Fewer than three bursts
// make no schedule yet (schedule.Build's minimum).
func (l *listener) schedule(r survey.Record) error {
	w := l.w
	r.Level, r.Fit = nil, nil // keep the record small
	if len(l.obs) == MaxScheduleBursts {
		l.obs = append(l.obs[:0], l.obs[1:]...)
	}
	l.obs = append(l.obs, r)
	if len(l.obs) < 3 || r.End.IsZero() {
		return nil
	}
	words := make([][]idmatch.Word, len(l.obs))
	for i, o := range l.obs {
		words[i] = o.Words
	}
	obs := survey.Observations(l.obs)
	nm, err := l.idf.Name(obs, words)
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
			labels[i] = channelLabel(a.Transmitter, l.ch.FreqHz, len(w.chans))
		}
	}
	opts := schedule.DefaultOptions()
	opts.NextCount = 0
	opts.CaptureStart, opts.CaptureEndS, opts.ListedIDs = w.info.Start, r.EndS, l.ch.IDs
	plan, err := schedule.Build(obs, labels, opts)
	if err != nil {
		return nil // too few usable bursts yet
	}
	rows := logbook.ScheduleRows(plan, r.End)
	if len(rows) == 0 {
		return nil
	}
	for i := range rows {
		rows[i].ChannelHz = l.ch.FreqHz
	}
	if err := w.o.DB.PutSchedules(rows); err != nil {
		return w.dbErr(err)
	}
	return nil
}

// channelLabel is how a transmitter known only by its fingerprint label
// (T1, …) is stored when the station listens on channels channels: the
// label alone on one channel; with its channel's frequency on several,
// since the store keys transmitters by name and T1 of one channel is not
// T1 of another.
func channelLabel(label string, freqHz float64, channels int) string {
	if channels <= 1 {
		return label
	}
	return fmt.Sprintf("%s@%.4fMHz", label, freqHz/1e6)
}
