package survey

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"time"

	"nullseek/bearing"
	"nullseek/capture"
	"nullseek/heading"
	"nullseek/ident/schedule"
	"nullseek/internal/angle"
	"nullseek/internal/atomicfile"
	"nullseek/internal/units"
	"nullseek/receiver"
	"nullseek/sdr"
)

// Job is what the commands that read a recording (scan, slots, bearing,
// calibrate) share: their flags, the recording, and where what they
// found is kept. Each command's job type has one Run, its entry point.
type Job struct {
	Input    InputFlags
	Idents   IdentFlags
	Headings HeadingFlags // bearing and calibrate only
	// Path is the recording; Track the heading track a live capture
	// recorded with it (nil: the heading flags say).
	Path  string
	Track *heading.Track
	// Keep stores what a run found (a station database); nil keeps
	// nothing. It is called before any output file is committed.
	Keep func(Kept) error
}

// Kept is what a run found, to be stored: the recording's survey, and for
// a bearing run the per-burst bearings, the true heading track and the
// station (position, antenna, mount offset); for a slots run the plan.
type Kept struct {
	Path       string
	Result     *Result
	Bearings   []BurstBearing
	Track      *heading.Track
	Plan       *schedule.Plan
	HasStation bool
	Lat, Lon   float64
	Antenna    string
	MountDeg   float64
}

func (j *Job) keep(k Kept) error {
	if j.Keep == nil {
		return nil
	}
	k.Path = j.Path
	return j.Keep(k)
}

// survey scans the recording (Input.Run) with notes on stderr.
func (j *Job) survey(ctx context.Context, stderr io.Writer) (*Result, error) {
	in, err := j.Input.Input(j.Path, &j.Idents, stderr)
	if err != nil {
		return nil, err
	}
	return in.Run(ctx, nil)
}

// LiveOptions are the options of a live capture from the receiver at
// target (o and f: the capture flags, numbers and grammars), checked
// together with the job's own flags before anything is connected.
func (j *Job) LiveOptions(target string, o capture.Options, f capture.Flags, stderr io.Writer) (capture.Options, error) {
	in := &j.Input
	if in.Format != "" || in.Start != "" {
		return o, fmt.Errorf("--format and --start describe a raw recording; a live receiver gives cu8 and its own start time")
	}
	f.Target, f.Rate, f.Center, f.Freq = target, in.Rate, in.Center, in.Freq
	if err := o.Parse(f); err != nil {
		return o, err
	}
	hs, err := j.Headings.SourceFor(nil, stderr)
	if err == nil {
		err = o.SetHeadings(hs.Ref, hs.Turn, hs.LogPath, hs.NMEAPath)
		o.SetStation(hs.HasStation, hs.StationLat, hs.StationLon)
	}
	if err == nil {
		err = o.Validate()
	}
	if err == nil {
		_, _, err = in.Config()
	}
	if err == nil {
		_, err = j.Idents.Options()
	}
	if err == nil {
		_, err = hs.Pattern()
	}
	if err == nil && o.Ref == heading.Magnetic && o.HeadingFile == "" {
		// The run converts with the recording's start time; this only
		// checks now that it will be able to.
		_, err = hs.DeclinationAt(time.Now().UTC(), nil)
	}
	return o, err
}

// ScanJob is the scan command: every burst of the recording, or with
// List only the carriers seen.
type ScanJob struct {
	Job
	JSON, List bool
}

// Run scans and prints the table (with its summary line) or JSON lines.
func (j *ScanJob) Run(ctx context.Context, stdout, stderr io.Writer) error {
	if j.List {
		return j.carriers(stdout)
	}
	t0 := time.Now()
	res, err := j.survey(ctx, stderr)
	if err != nil {
		return err
	}
	if err := j.keep(Kept{Result: res}); err != nil {
		return err
	}
	if j.JSON {
		return res.WriteJSON(stdout)
	}
	if err := res.WriteTable(stdout); err != nil {
		return err
	}
	_, err = fmt.Fprintln(stdout, res.SummaryLine(time.Since(t0)))
	return err
}

// carriers prints the carriers seen in the recording.
func (j *ScanJob) carriers(stdout io.Writer) error {
	raw, err := j.Input.Raw()
	if err != nil {
		return err
	}
	src, err := sdr.Open(j.Path, raw)
	if err != nil {
		return err
	}
	defer src.Close()
	cs, err := receiver.FindCarriers(src, receiver.CarrierSearch{})
	if err != nil {
		return err
	}
	if j.JSON {
		return receiver.WriteCarriersJSON(stdout, cs, src.Info())
	}
	return receiver.WriteCarriers(stdout, cs, src.Info())
}

// SlotsJob is the slots command: the slot plan of the recording's bursts
// or, without a recording (Path ""), of the bursts Stored reads.
type SlotsJob struct {
	Job
	JSON bool
	Plan schedule.Options
	// PeriodGiven says --period was given (0 then refused).
	PeriodGiven bool
	Stored      func(schedule.Options) (*schedule.Plan, error)
}

// Run works out the plan and prints it as a table or one JSON object.
func (j *SlotsJob) Run(ctx context.Context, stdout, stderr io.Writer) error {
	if j.PeriodGiven {
		if err := units.NonZeroFlag("period", j.Plan.NominalPeriodS); err != nil {
			return err // 0 would silently mean "unknown"
		}
	}
	if err := j.Plan.Validate(); err != nil {
		return err
	}
	plan, err := j.plan(ctx, stderr)
	if err != nil {
		return err
	}
	if j.JSON {
		return json.NewEncoder(stdout).Encode(plan)
	}
	return plan.WriteTable(stdout)
}

func (j *SlotsJob) plan(ctx context.Context, stderr io.Writer) (*schedule.Plan, error) {
	if j.Path == "" {
		return j.Stored(j.Plan)
	}
	res, err := j.survey(ctx, stderr)
	if err != nil {
		return nil, err
	}
	plan, err := Schedule(res, j.Plan)
	if err == nil {
		err = j.keep(Kept{Result: res, Plan: plan})
	}
	return plan, err
}

// BearingJob is the bearing command: a bearing per burst and per
// transmitter, printed, and optionally plotted (Plot, PlotBursts) and
// written as a bearings CSV (LOPCSV).
type BearingJob struct {
	Job
	JSON         bool
	Plot, LOPCSV string
	PlotBursts   bool
	// StationName and StationAltM name the station and give its height
	// (a station file's); "" and nil when not known.
	StationName string
	StationAltM *float64
}

// Run fits the bearings. Every output is checked before the recording is
// read, and all are staged and committed together once the results are
// in: a failure leaves no plot without its CSV, nor half a table.
func (j *BearingJob) Run(ctx context.Context, stdout, stderr io.Writer) error {
	hs, err := j.Headings.SourceFor(j.Track, stderr)
	if err != nil {
		return err
	}
	if _, err := hs.Pattern(); err != nil {
		return err
	}
	if j.Plot != "" {
		if err := CheckPlotPath(j.Plot); err != nil {
			return err
		}
	}
	if j.LOPCSV != "" {
		if !hs.HasStation {
			return fmt.Errorf("--bearings-csv needs the station's position: --station LAT,LON")
		}
		if err := atomicfile.Check(j.LOPCSV); err != nil {
			return fmt.Errorf("--bearings-csv: %w", err)
		}
	}
	in, err := j.Input.Input(j.Path, &j.Idents, stderr)
	if err != nil {
		return err
	}
	res, tr, pat, err := hs.Survey(ctx, in, true)
	if err != nil {
		return err
	}
	if len(res.Records) == 0 {
		return fmt.Errorf("%s: no bursts found, so no bearing", j.Path)
	}
	bbs, txs := Bearings(res, tr, pat, hs.Bearing.Fit, hs.Bearing.SiteSigmaDeg)
	if err := NoBearing(j.Path, bbs, txs); err != nil {
		return err
	}
	mount, _ := hs.Bearing.MountOffset(pat) // checked by hs.Pattern
	ref := ReferenceNote(pat, tr.Ref, mount)
	hs.StationName, hs.StationAltM = j.StationName, j.StationAltM
	var outs atomicfile.Set
	defer outs.Abort()
	if j.Plot != "" {
		if err := StagePolarPlots(&outs, j.Plot, bbs, txs, pat, ref, j.PlotBursts); err != nil {
			return err
		}
	}
	if j.LOPCSV != "" {
		if err := StageLOPs(&outs, j.LOPCSV, hs.Site(), txs); err != nil {
			return err
		}
	}
	var text bytes.Buffer
	if j.JSON {
		err = WriteBearingsJSON(&text, bbs, txs, hs.Site())
	} else {
		err = WriteBearingTable(&text, bbs, txs, ref)
	}
	if err != nil {
		return err
	}
	if err := j.keep(Kept{Result: res, Bearings: bbs, Track: tr, HasStation: hs.HasStation,
		Lat: hs.StationLat, Lon: hs.StationLon, Antenna: hs.Bearing.Antenna.Kind, MountDeg: mount}); err != nil {
		return err
	}
	if err := outs.Commit(); err != nil {
		return err
	}
	_, err = text.WriteTo(stdout)
	return err
}

// CalibrateJob is the calibrate command: the antenna's measured pattern,
// saved to Out, from a sweep of a transmitter at a known bearing
// (KnownBearing, or Tx and the station) whose identifier is TxIdent when
// several were heard.
type CalibrateJob struct {
	Job
	Tx, KnownBearing, TxIdent, Out string
	JSON                           bool
}

// Run measures the pattern, saves it and prints the result.
func (j *CalibrateJob) Run(ctx context.Context, stdout, stderr io.Writer) error {
	hs, err := j.Headings.SourceFor(j.Track, stderr)
	if err != nil {
		return err
	}
	known, how, err := KnownBearing{Bearing: j.KnownBearing, Tx: j.Tx, Station: j.Headings.Station,
		HasStation: hs.HasStation, StationLat: hs.StationLat, StationLon: hs.StationLon}.Degrees()
	if err != nil {
		return err
	}
	if j.Out == "" {
		return fmt.Errorf("calibrate needs --out FILE.json for the measured pattern")
	}
	nominal, err := hs.Pattern()
	if err != nil {
		return err
	}
	given, err := hs.Bearing.MountOffset(nominal)
	if err != nil {
		return err
	}
	in, err := j.Input.Input(j.Path, &j.Idents, stderr)
	if err != nil {
		return err
	}
	res, tr, _, err := hs.Survey(ctx, in, false)
	if err != nil {
		return err
	}
	when := "undated"
	if !res.Info.Start.IsZero() {
		when = res.Info.Start.UTC().Format("2006-01-02")
	}
	cal, err := Calibrate(res, tr, nominal, known, CalibrationOptions{
		Ident: j.TxIdent, Fit: hs.Bearing.Fit, Name: fmt.Sprintf("calibrated %s, nominal %s", when, nominal.Name)})
	if err != nil {
		return err
	}
	total := angle.Wrap180(given + cal.NorthOffsetDeg)
	cal.Pattern.MountOffsetDeg, cal.Pattern.MountOffsetSet = total, true
	if err := j.keep(Kept{Result: res}); err != nil {
		return err
	}
	if err := bearing.SavePattern(j.Out, cal.Pattern); err != nil {
		return err
	}
	if j.JSON {
		return json.NewEncoder(stdout).Encode(cal.Line(total, given, how, j.Out))
	}
	return cal.WriteReport(stdout, nominal.Name, total, given, how, j.Out)
}
