package logbook

import (
	"fmt"
	"math"
	"time"

	"nullseek/bearing"
	"nullseek/ident/idmatch"
	"nullseek/ident/schedule"
	"nullseek/internal/angle"
	"nullseek/store"
	"nullseek/survey"
)

// NoCarrierSNRDB is the SNR stored for a burst whose carrier could not be
// measured (receiver.Burst.SNRDB is −Inf): the store holds finite numbers
// only, and −100 dB is below any carrier a receiver reports.
const NoCarrierSNRDB = -100.0

// finiteOr is v, or def when v is NaN or infinite.
func finiteOr(v, def float64) float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return def
	}
	return v
}

// BurstRow maps a survey record to the store's burst row on capture c
// (sample rate rate). Only a listed identifier names the transmitter:
// a fingerprint label is the recording's own and would join unrelated
// bursts of other recordings. A part of a burst split by fingerprint
// starts at its own sample.
func BurstRow(c store.CaptureID, r survey.Record, rate float64) store.Burst {
	snr := r.SNRDB
	if !(snr > NoCarrierSNRDB) {
		snr = NoCarrierSNRDB
	}
	b := store.Burst{Capture: c, StartSample: r.StartSample, EndSample: r.EndSample, StartS: r.StartS, EndS: r.EndS,
		Start: r.Start, End: r.End, OffsetHz: r.OffsetHz, FreqHz: finiteOr(r.FreqHz, 0),
		LevelDBFS: r.LevelDB, PeakDBFS: finiteOr(r.PeakDB, r.LevelDB), NoiseDBFS: finiteOr(r.NoiseDB, NoCarrierSNRDB), SNRDB: snr,
		ClippedFraction: r.Clipped, CutAtStart: r.CutAtStart || r.SplitStart, CutAtEnd: r.CutAtEnd || r.SplitEnd,
		DoubleCarrier: r.DoubleCarrier, CarrierSpreadHz: finiteOr(r.CarrierSpreadHz, 0), Mode: r.Mode, Text: r.Text,
		IdentConfidence: r.IdentConfidence, IdentMethod: r.IdentMethod, ToneHz: finiteOr(r.ToneHz, 0), WPM: finiteOr(r.WPM, 0)}
	if idmatch.Known(r.Ident) {
		b.Ident = r.Ident
	}
	if r.Parts > 0 {
		b.StartSample = r.StartSample + int64(math.Round((r.StartS-r.Burst.StartS)*rate))
		b.EndSample = max(b.StartSample, r.StartSample+int64(math.Round((r.EndS-r.Burst.StartS)*rate)))
	}
	return b
}

// Readings are a record's level readings as the store's rows (the Writer
// thins them).
func Readings(r survey.Record) []store.LevelReading {
	out := make([]store.LevelReading, 0, len(r.Level))
	for _, l := range r.Level {
		if math.IsNaN(l.LevelDB) || math.IsInf(l.LevelDB, 0) {
			continue
		}
		out = append(out, store.LevelReading{Sample: l.Sample, TimeS: l.T, LevelDBFS: l.LevelDB, Clipped: l.Clipped})
	}
	return out
}

// Fitted is where a bearing was taken and how its north was found.
type Fitted struct {
	Station                      store.StationID
	StationLatDeg, StationLonDeg float64
	StationAltM                  *float64
	// DeclinationDeg, when set, says the estimate is magnetic and turns
	// it true (east positive); nil: the estimate is true already.
	DeclinationDeg *float64
	// NoPosition: where the station was is not known (a moving station
	// whose position source had no fix then); the lat/lon are not used.
	NoPosition bool
}

// BearingRow maps burst b's fitted estimate to the store's bearing row, or
// says why there is none (a refused fit, or a figure the store cannot
// hold).
func BearingRow(e bearing.Estimate, fitErr error, b store.Burst, at Fitted) (store.Bearing, string) {
	if fitErr != nil {
		return store.Bearing{}, fitErr.Error()
	}
	if !(e.SigmaDeg > 0 && e.SigmaDeg <= 180) || math.IsNaN(e.BearingDeg) || math.IsInf(e.BearingDeg, 0) {
		return store.Bearing{}, fmt.Sprintf("the fit gave %.1f° ± %.1f°", e.BearingDeg, e.SigmaDeg)
	}
	br := store.Bearing{Capture: b.Capture, BurstStartSample: b.StartSample, Station: at.Station, Ident: b.Ident, Time: b.Start,
		TrueDeg: angle.Wrap360(e.BearingDeg), SigmaDeg: e.SigmaDeg, StationLatDeg: at.StationLatDeg, StationLonDeg: at.StationLonDeg,
		StationAltM: at.StationAltM, NullDepthDB: finiteOr(e.NullDepthDB, 0), CoverageDeg: finiteOr(e.CoverageDeg, 0),
		ResidualDB: finiteOr(e.ResidualDB, 0), Points: e.Points, Warnings: e.Warnings, NoPosition: at.NoPosition}
	if at.NoPosition {
		br.StationLatDeg, br.StationLonDeg, br.StationAltM = 0, 0, nil
	}
	alt := e.AltBearingDeg
	if at.DeclinationDeg != nil {
		mag := angle.Wrap360(e.BearingDeg)
		br.MagneticDeg, br.DeclinationDeg = &mag, at.DeclinationDeg
		br.TrueDeg = angle.Wrap360(mag + *at.DeclinationDeg)
		if alt != nil {
			a := *alt + *at.DeclinationDeg
			alt = &a
		}
	}
	if alt != nil {
		a := angle.Wrap360(*alt)
		br.AltTrueDeg, br.Flags = &a, br.Flags|store.FlagAmbiguous
	}
	if e.HasFlag(bearing.FlagClipping) {
		br.Flags |= store.FlagClipped
	}
	if e.HasFlag(bearing.FlagPartial) {
		br.Flags |= store.FlagLowCoverage
	}
	if e.BootstrapSigmaDeg > 2*e.FisherSigmaDeg && e.SigmaDeg == e.BootstrapSigmaDeg {
		br.Flags |= store.FlagBootstrapSigma
	}
	if b.CutAtStart || b.CutAtEnd {
		br.Flags |= store.FlagBurstCut
	}
	return br, ""
}

// ScheduleRows maps a slot plan to the store's rows as of asOf; a row the
// store would refuse is left out (a schedule not worth keeping).
func ScheduleRows(p *schedule.Plan, asOf time.Time) []store.Schedule {
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
			continue
		}
		rows = append(rows, s)
	}
	return rows
}
