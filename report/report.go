package report

import (
	"time"

	"nullseek/geo"
	"nullseek/ident/schedule"
)

// Report is everything one page shows. Lists are shown in the order given.
type Report struct {
	// Title heads the page ("" for "nullseek session report").
	Title string
	// Generated is when the report was made (zero: not shown).
	Generated time.Time
	// Notes are lines shown under the title (the scene, the inputs).
	Notes        []string
	Stations     []Station
	Transmitters []Transmitter
	Bearings     []Bearing
	// Schedule is the slot schedule (nil: none was worked out).
	Schedule *Schedule
	Fixes    []Fix
	Refusals []Refusal
	// Warnings are shown with the fixes (run-wide notes of the fix).
	Warnings []string
	// Maps and Polars are the pictures (PNG or SVG bytes).
	Maps, Polars []Image
}

// Station is one receiving station and the recording its bearings come from.
type Station struct {
	Name     string
	Lat, Lon float64 // degrees, WGS 84
	// Recording is the file (or live source) the bearings were measured
	// from; Antenna the antenna (its pattern); HeadingSource where the
	// antenna's heading came from (a log, NMEA, a rotator, a steady turn).
	Recording, Antenna, HeadingSource string
	// Start and End bound the recording (UTC; zero: not recorded).
	Start, End time.Time
	// Bursts is the number of bursts found in the recording (0: not
	// recorded).
	Bursts int
}

// Transmitter is one transmitter heard in the session.
type Transmitter struct {
	Ident string
	// Bursts is the number of bursts heard of it, over all stations (0: not
	// recorded).
	Bursts int
	// Note says more (e.g. "heard at 3 stations").
	Note string
}

// Bearing is one station's bearing of one transmitter. What it was
// measured from beyond the station (recording, antenna, heading source)
// is the station's.
type Bearing struct {
	Ident, Station string
	// BearingDeg is clockwise from the north named by Reference, 0–360;
	// SigmaDeg its 1-sigma.
	BearingDeg, SigmaDeg float64
	// AltBearingDeg is the other null of an ambiguous pattern (a loop's
	// two nulls); nil when the bearing is not ambiguous.
	AltBearingDeg *float64
	// Reference says which north: "true", or "magnetic" with the
	// declination used.
	Reference string
	// BurstsUsed is the number of bursts the bearing was fitted from (0:
	// not recorded).
	BurstsUsed int
	// First and Last are the time the bearing covers (UTC): the first and
	// last burst used, or First alone for a bearing that carries one time
	// (a bearings file's row); zero: not recorded.
	First, Last time.Time
}

// Schedule is the slot schedule of the transmitters sharing the channel.
type Schedule struct {
	// From says which recording or station the schedule was worked out from.
	From string
	// Order is the cyclic order; CommonPeriodS the common cycle (s);
	// DriftReference what drifts are measured against.
	Order          []string
	CommonPeriodS  float64
	DriftReference string
	// CaptureStart is the recording's start (UTC; zero: not known, times
	// are then seconds from the start).
	CaptureStart time.Time
	Rows         []ScheduleRow
	Collisions   []Collision
	Notes        []string
}

// ScheduleRow is one transmitter's slot.
type ScheduleRow struct {
	Ident                 string
	Bursts                int
	PeriodS, PeriodSigmaS float64
	OnS, GapS             float64
	// DriftPPM is positive when the slot slides later each cycle.
	DriftPPM, DriftSigmaPPM float64
	// NextOn is the first predicted start after the recording (UTC; zero
	// when not predicted or the capture start is unknown), NextOnS the same
	// in seconds from the capture start (NaN when not predicted) and
	// NextOnSigmaS its 1-sigma.
	NextOn                time.Time
	NextOnS, NextOnSigmaS float64
	// Reason says why an estimate is missing.
	Reason string
}

// Collision is a forecast of two neighbouring slots running into each other.
type Collision struct {
	A, B string
	// At is when (UTC; zero: the capture start is unknown, then AtS
	// seconds from it); SigmaS its 1-sigma.
	At          time.Time
	AtS, SigmaS float64
	// Already: the slots overlapped during the recording. Significant:
	// the closing rate is more than 2 sigma from zero.
	Already, Significant bool
}

// Fix is one transmitter's position.
type Fix struct {
	Ident    string
	Lat, Lon float64 // degrees, WGS 84
	// Maidenhead is the locator; GridCell the event-grid cell ("" outside
	// the grid) and Grid the grid's description ("" without one).
	Maidenhead, GridCell, Grid string
	// Probability is the ellipse's (e.g. 0.95); the semi-axes are in
	// metres, OrientationDeg the long axis clockwise from true north, 0–180.
	Probability, SemiMajorM, SemiMinorM, OrientationDeg float64
	// Stations is the number of stations whose bearings were used;
	// BearingsUsed and BearingsRejected count the bearings.
	Stations, BearingsUsed, BearingsRejected int
	// CrossingDeg is the widest angle at which the used lines cross (0–90).
	CrossingDeg float64
	// Cells are the most probable grid cells, most probable first.
	Cells    []geo.CellProb
	Warnings []string
}

// Refusal is a transmitter that could not be fixed, and why.
type Refusal struct {
	Ident, Reason string
}

// Image is one picture: PNG or SVG bytes and its caption.
type Image struct {
	Caption string
	Data    []byte
}

// FixFromReport makes a fix row from the fix's JSON form (geo.Fix.Report,
// the lines of `nullseek fix --json`).
func FixFromReport(r geo.FixReport) Fix {
	f := Fix{
		Ident: r.Ident, Lat: r.Lat, Lon: r.Lon, Maidenhead: r.Maidenhead, GridCell: r.GridCell,
		Probability: r.Ellipse.Probability, SemiMajorM: r.Ellipse.SemiMajorM, SemiMinorM: r.Ellipse.SemiMinorM,
		OrientationDeg: r.Ellipse.OrientationDeg, Stations: r.Stations, BearingsUsed: len(r.Used),
		BearingsRejected: len(r.Rejected), CrossingDeg: r.CrossingDeg, Cells: r.Cells, Warnings: r.Warnings,
	}
	if r.Grid != nil {
		f.Grid = r.Grid.Spec
	}
	return f
}

// ScheduleFromPlan makes the schedule section from a slot plan; from says
// which recording or station it was worked out from.
func ScheduleFromPlan(p *schedule.Plan, from string) *Schedule {
	s := &Schedule{From: from, Order: p.Order, CommonPeriodS: p.CommonPeriodS, DriftReference: p.DriftReference,
		CaptureStart: p.CaptureStart, Notes: p.Notes}
	if p.NominalMisfit != "" {
		s.Notes = append([]string{"misfit: " + p.NominalMisfit}, s.Notes...)
	}
	for _, t := range p.Transmitters {
		r := ScheduleRow{Ident: t.ID, Bursts: t.Bursts, PeriodS: t.PeriodS, PeriodSigmaS: t.PeriodSigmaS,
			OnS: t.OnS, GapS: t.GapS, DriftPPM: t.DriftPPM, DriftSigmaPPM: t.DriftSigmaPPM,
			NextOnS: nan, NextOnSigmaS: nan, Reason: t.Reason}
		if len(t.NextOnS) > 0 {
			r.NextOnS, r.NextOnSigmaS = t.NextOnS[0], t.NextOnSigmaS[0]
		}
		if len(t.NextOn) > 0 {
			r.NextOn = t.NextOn[0]
		}
		s.Rows = append(s.Rows, r)
	}
	for _, c := range p.Collisions {
		s.Collisions = append(s.Collisions, Collision{A: c.A, B: c.B, At: c.At, AtS: c.AtS, SigmaS: c.SigmaS,
			Already: c.Already, Significant: c.Significant})
	}
	return s
}
