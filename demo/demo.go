// Package demo does the whole job of nullseek on a built-in invented
// scenario (sim.Demo: three beacons taking turns on one channel, heard by
// three stations with turning antennas; call N0CALL, an invented place):
// it finds the bursts, reads the identifiers, works out the slot schedule
// (ident/schedule), fits a bearing per transmitter at every station
// (survey.Bearings) and fixes each transmitter (locate.RunLOPs), as on
// real recordings, and compares every result with the scene's truth.
//
// Its report is for a person; the files it makes (bearings CSV, GeoJSON,
// map, polar plots, heading logs, optionally the recordings) are those
// the other commands make, staged (atomicfile.Set) and committed together
// at the end.
package demo

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"time"

	"nullseek/bearing"
	"nullseek/geo"
	"nullseek/heading"
	"nullseek/ident"
	"nullseek/ident/schedule"
	"nullseek/internal/angle"
	"nullseek/internal/atomicfile"
	"nullseek/locate"
	"nullseek/logbook"
	"nullseek/receiver"
	"nullseek/sdr"
	"nullseek/sim"
	"nullseek/survey"
)

// DefaultOutDir is the folder the demo's files go to unless told.
const DefaultOutDir = "nullseek-demo"

// IQRateHz is the sample rate of the recordings the demo keeps (cu8),
// one an RTL2832 supports (sdr.RTLMinRateLow…sdr.RTLMaxRateLow), so that
// `nullseek replay` can serve them over rtl_tcp. The demo's own analysis
// renders the scene at the scenario's lower rate; the kept recordings are
// the same scene rendered at this one.
const IQRateHz = 240000

// IDsFile is the list of the demo's identifiers it writes (one a line,
// the form --ids @FILE reads).
const IDsFile = "ids.txt"

// Run runs the demo, writing its files to outDir and its report to out
// once everything has worked (a failure prints no half report and leaves
// outDir as it was); progress (nil: none) gets a line per stage while it
// runs. With writeIQ each station's recording is kept as a SigMF pair too;
// with db (a path, "" for none) every station's bursts, level readings,
// headings and bearings, the schedule and the fixes are stored there too
// (logbook), before the files are committed.
func Run(ctx context.Context, out, progress io.Writer, outDir string, writeIQ bool, db string) error {
	if progress == nil {
		progress = io.Discard
	}
	var report bytes.Buffer
	w := &report
	sc, err := sim.Demo()
	if err != nil {
		return err
	}
	var ids []string
	for _, b := range sc.Beacons {
		ids = append(ids, b.ID)
	}
	// Every file the demo makes is checked before the work starts and
	// staged until the end: a failure leaves the folder as it was (and
	// removes it when the demo made it).
	names := []string{"bearings.csv", "fixes.geojson", "map.png", "report.html", IDsFile}
	for _, st := range sc.Stations {
		names = append(names, "headings-"+st.Name+".csv")
		for _, id := range ids {
			names = append(names, filepath.Base(survey.PolarPlotPath("polar-"+st.Name+".png", id)))
		}
		if writeIQ {
			names = append(names, "station-"+st.Name+".sigmf-data", "station-"+st.Name+".sigmf-meta")
		}
	}
	for _, n := range names {
		if err := atomicfile.Check(filepath.Join(outDir, n)); err != nil {
			return fmt.Errorf("--out: %w", err)
		}
	}
	if db != "" {
		if err := logbook.Check(db); err != nil {
			return err
		}
	}
	_, statErr := os.Stat(outDir)
	if err := os.MkdirAll(outDir, 0o755); err != nil {
		return fmt.Errorf("--out: %w", err)
	}
	var outs atomicfile.Set
	defer outs.Abort()
	committed := false
	if os.IsNotExist(statErr) {
		defer func() {
			if !committed {
				outs.Abort()
				os.Remove(outDir) // only if still empty
			}
		}()
	}
	if err := outs.WriteFunc(filepath.Join(outDir, IDsFile), func(w io.Writer) error {
		_, err := io.WriteString(w, strings.Join(ids, "\n")+"\n")
		return err
	}); err != nil {
		return err
	}
	fmt.Fprintf(w, "Bearing sigmas include a %.0f° site error (multipath a single site cannot see).\n", survey.DefaultSiteSigmaDeg)
	fmt.Fprintf(w, "Scenario %q at %s (invented): %d beacons on %.4f MHz, %d stations, %.0f s each, starting %s\n\n",
		sc.Name, sc.Place, len(sc.Beacons), sc.ChannelHz/1e6, len(sc.Stations), sc.DurationS, sc.Start.Format(time.RFC3339))

	var lops []geo.LOP
	var recs []geo.BearingRecord
	var first *survey.Result
	var runs []stationRun // for the report page
	var logged []logbook.Recording
	for si, st := range sc.Stations {
		src, err := sim.NewSource(sc, st)
		if err != nil {
			return err
		}
		if writeIQ {
			if err := StageStationIQ(&outs, sc, st, outDir); err != nil {
				return err
			}
		}
		fmt.Fprintf(progress, "demo: station %s (%d of %d)...\n", st.Name, si+1, len(sc.Stations))
		t0 := time.Now()
		res, err := survey.Run(ctx, src, survey.Options{
			Receiver: receiverConfig(sc),
			Ident:    ident.Options{IDs: ids},
		}, nil)
		if err != nil {
			return err
		}
		track, err := st.Turn.Track(0, sc.DurationS, 10)
		if err != nil {
			return err
		}
		if err := outs.WriteFunc(filepath.Join(outDir, "headings-"+st.Name+".csv"), func(w io.Writer) error { return heading.WriteLog(w, track) }); err != nil {
			return err
		}
		bbs, txs := survey.Bearings(res, track, st.Antenna, bearing.FitOptions{}, survey.DefaultSiteSigmaDeg)
		runs = append(runs, stationRun{st, res, bbs, txs})
		logged = append(logged, logbook.Recording{Key: logbook.KeyOf("nullseek demo", sc.Name, st.Name, sc.Start.Format(time.RFC3339Nano)),
			Station: logbook.Station{Name: st.Name, LatDeg: st.Lat, LonDeg: st.Lon, HasPosition: true, Antenna: st.AntennaName},
			Result:  res, Bearings: bbs, Track: track})
		if si == 0 {
			first = res
			fmt.Fprintf(w, "Station %s: bursts found\n", st.Name)
			if err := res.WriteTable(w); err != nil {
				return err
			}
			fmt.Fprintln(w, res.SummaryLine(time.Since(t0)))
			fmt.Fprintln(w)
		}
		fmt.Fprintf(w, "Station %s (%s, %s antenna turning %+.0f°/s): bearings\n", st.Name,
			geo.FormatLatLon(st.Lat, st.Lon), st.AntennaName, st.Turn.RateDegPerS)
		fmt.Fprintf(w, "  %-10s %9s %7s %9s %6s %9s\n", "ident", "bearing", "±1σ", "truth", "error", "bursts")
		for _, tb := range txs {
			if tb.Err != nil {
				fmt.Fprintf(w, "  %-10s no bearing: %v\n", tb.Ident, tb.Err)
				continue
			}
			truth := math.NaN()
			for _, b := range sc.Beacons {
				if b.ID == tb.Ident {
					truth = sim.TrueBearing(st, b)
				}
			}
			c := tb.Combined
			alt := ""
			if c.AltBearingDeg != nil {
				alt = fmt.Sprintf("  (or %.1f°: the loop's two nulls)", *c.AltBearingDeg)
			}
			fmt.Fprintf(w, "  %-10s %8.1f° %6.1f° %8.1f° %+5.1f° %6d%s\n", tb.Ident, c.BearingDeg, tb.SigmaDeg,
				truth, angle.Wrap180(c.BearingDeg-truth), c.BurstsUsed, alt)
			// the record the bearings CSV and bearing --json carry (the
			// time of the first burst used, not the capture start)
			if rec, ok := tb.Record(survey.Site{Station: st.Name, Lat: st.Lat, Lon: st.Lon, HasPosition: true}); ok {
				recs = append(recs, rec)
				lops = append(lops, rec.LOP)
			}
		}
		// one polar plot per transmitter, from its combined bearing
		note := survey.ReferenceNote(st.Antenna, heading.True, 0) + " (station " + st.Name + ")"
		if err := survey.StagePolarPlots(&outs, filepath.Join(outDir, "polar-"+st.Name+".png"), bbs, txs, st.Antenna, note, false); err != nil {
			return err
		}
		fmt.Fprintln(w)
	}

	// Slot schedule from the first station.
	obs := survey.Observations(first.Records)
	var labels []string
	for _, r := range first.Records {
		labels = append(labels, r.Ident)
	}
	so := schedule.DefaultOptions()
	so.NominalPeriodS, so.CaptureEndS = sc.Beacons[0].PeriodS, sc.DurationS
	plan, err := schedule.Build(obs, labels, so)
	if err != nil {
		plan = nil
		fmt.Fprintf(w, "Slot schedule: %v\n\n", err)
	} else {
		fmt.Fprintf(w, "Slot schedule (from %s):\n", sc.Stations[0].Name)
		if err := plan.WriteTable(w); err != nil {
			return err
		}
		fmt.Fprintln(w, "  truth: drifts", drifts(sc))
		fmt.Fprintln(w)
	}

	// Fixes.
	if err := outs.WriteFunc(filepath.Join(outDir, "bearings.csv"), func(w io.Writer) error { return geo.WriteBearingsCSV(w, recs) }); err != nil {
		return err
	}
	grid := &geo.Grid{OriginLat: sc.GridOriginLat, OriginLon: sc.GridOriginLon, CellM: sc.GridCellM,
		Cols: sc.GridCols, Rows: sc.GridRows, FirstRow: 1}
	opt := locate.Options{Grid: grid, GeoJSONPath: filepath.Join(outDir, "fixes.geojson"), MapPath: filepath.Join(outDir, "map.png"), Stage: &outs}
	opt.Map.Title = "nullseek demo: " + sc.Place
	res, err := locate.RunLOPs(lops, opt)
	if err != nil {
		return err
	}
	fmt.Fprintf(w, "Fixes (95%% ellipses, semi-axes; event grid %s):\n", grid)
	for _, f := range res.Fixes {
		var truthErr float64
		for _, b := range sc.Beacons {
			if b.ID == f.Ident {
				truthErr, _, _ = geo.Inverse(f.Lat, f.Lon, b.Lat, b.Lon)
			}
		}
		cells := ""
		for i, c := range f.Cells {
			if i == 3 {
				break
			}
			cells += fmt.Sprintf(" %s %.0f%%", c.Cell, 100*c.Probability)
		}
		fmt.Fprintf(w, "  %-10s %s  %s  cell %-4s ellipse semi-axes %.0f×%.0f m at %.0f°; %.0f m from truth; cells:%s\n",
			f.Ident, geo.FormatLatLon(f.Lat, f.Lon), f.Maidenhead, f.GridCell,
			f.Ellipse.SemiMajorM, f.Ellipse.SemiMinorM, f.Ellipse.OrientationDeg, truthErr, cells)
		for _, wn := range f.Warnings {
			fmt.Fprintf(w, "  %-10s warning: %s\n", "", wn)
		}
	}
	for _, r := range res.Refused {
		fmt.Fprintf(w, "  %-10s no fix: %v\n", r.Ident, r.Err)
	}
	if len(res.OutputErrors) > 0 && len(res.Fixes) > 0 {
		return res.OutputErrors[0]
	}
	if err := stageReport(&outs, outDir, sc, runs, plan, res); err != nil {
		return err
	}
	kept := ""
	if writeIQ {
		kept = fmt.Sprintf(", station-*.sigmf-meta/-data (cu8, %.0f kS/s)", IQRateHz/1e3)
	}
	fmt.Fprintf(w, "\nFiles in %s: report.html, bearings.csv, map.png, fixes.geojson, polar-*.png, headings-*.csv, %s%s\nTry: nullseek fix %s --grid %q\n",
		outDir, IDsFile, kept, filepath.Join(outDir, "bearings.csv"), grid.String())
	if db != "" {
		logged[0].Plan = plan
		saved, err := logbook.Save(db, logged...)
		if err != nil {
			return err
		}
		fixes, err := logbook.SaveFixes(db, res, nil)
		if err != nil {
			return err
		}
		fmt.Fprintf(w, "Database %s: %s; fixes: %d fixes, %d lines of position (%d new rows in all)\nTry: nullseek query bearings --db %s\n",
			db, strings.TrimPrefix(saved.String(), "stored in "+db+": "), fixes.Rows["fixes"], fixes.Rows["fix_lines"], saved.New()+fixes.New(), db)
	}
	if err := outs.Commit(); err != nil {
		return err
	}
	committed = true
	_, err = report.WriteTo(out)
	return err
}

func receiverConfig(sc sim.Scenario) (cfg receiver.Config) {
	cfg.FreqHz = sc.ChannelHz
	cfg.MergeGapS = survey.TurningMergeGapS
	return cfg
}

func drifts(sc sim.Scenario) string {
	var parts []string
	for _, b := range sc.Beacons {
		parts = append(parts, fmt.Sprintf("%s %+.0f ppm", b.ID, b.DriftPPM))
	}
	return strings.Join(parts, ", ")
}

// StageStationIQ renders station st's recording of scenario sc at
// IQRateHz into outs as the SigMF pair DIR/station-NAME.sigmf-meta/.sigmf-data
// (cu8).
func StageStationIQ(outs *atomicfile.Set, sc sim.Scenario, st sim.Station, dir string) error {
	sc.SampleRate = IQRateHz
	src, err := sim.NewSource(sc, st)
	if err != nil {
		return err
	}
	w, err := sdr.CreateSigMFIn(outs, filepath.Join(dir, "station-"+st.Name), src.Info(), "cu8")
	if err != nil {
		return err
	}
	buf := make([]complex64, 1<<16)
	for {
		n, rerr := src.Read(buf)
		if n > 0 {
			if err := w.Write(buf[:n]); err != nil {
				return err
			}
		}
		if rerr == io.EOF {
			break
		}
		if rerr != nil {
			w.Abort()
			return rerr
		}
	}
	return w.Close()
}
