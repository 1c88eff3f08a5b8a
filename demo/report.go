package demo

import (
	"fmt"
	"io"
	"math"
	"path/filepath"
	"sort"
	"strings"
	"time"

	"nullseek/heading"
	"nullseek/ident/schedule"
	"nullseek/internal/atomicfile"
	"nullseek/locate"
	"nullseek/report"
	"nullseek/report/session"
	"nullseek/sim"
	"nullseek/survey"
)

// stationRun is what the demo keeps of one station for its report.
type stationRun struct {
	st  sim.Station
	res *survey.Result
	bbs []survey.BurstBearing
	txs []survey.TxBearing
}

// northName names the north a heading reference gives bearings from.
func northName(ref heading.Ref) string {
	if ref == heading.Magnetic {
		return "magnetic"
	}
	return "true"
}

// stageReport stages the demo's report.html in outs, embedding the
// map and polar plots already staged there.
func stageReport(outs *atomicfile.Set, outDir string, sc sim.Scenario, runs []stationRun, plan *schedule.Plan, fixes *locate.Result) error {
	r := report.Report{
		Title:     "nullseek demo: " + sc.Place,
		Generated: time.Now().UTC(),
		Notes: []string{fmt.Sprintf("Scenario %q at %s (invented; call N0CALL): %d beacons on %.4f MHz, %d stations, %.0f s each.",
			sc.Name, sc.Place, len(sc.Beacons), sc.ChannelHz/1e6, len(sc.Stations), sc.DurationS),
			fmt.Sprintf("Bearing sigmas include a %.0f° site error (multipath a single site cannot see).", survey.DefaultSiteSigmaDeg)},
	}
	heard := map[string]int{}
	withBearing := map[string]int{}
	for _, run := range runs {
		st, info := run.st, run.res.Info
		recording := "simulated, not kept"
		if _, err := outs.ReadStaged(filepath.Join(outDir, "station-"+st.Name+".sigmf-data")); err == nil {
			recording = "station-" + st.Name + ".sigmf-data (simulated)"
		}
		s := report.Station{Name: st.Name, Lat: st.Lat, Lon: st.Lon, Recording: recording,
			Antenna:       st.AntennaName,
			HeadingSource: fmt.Sprintf("steady turn %+.0f°/s (simulated), logged to headings-%s.csv", st.Turn.RateDegPerS, st.Name),
			Start:         info.Start, End: info.End(), Bursts: len(run.res.Records)}
		r.Stations = append(r.Stations, s)
		ends := map[int]float64{}
		for _, rec := range run.res.Records {
			heard[rec.Ident]++
			ends[rec.Index] = rec.EndS
		}
		for _, t := range run.txs {
			if t.Err != nil {
				continue
			}
			withBearing[t.Ident]++
			c := t.Combined
			b := report.Bearing{Ident: t.Ident, Station: st.Name, BearingDeg: c.BearingDeg, SigmaDeg: t.SigmaDeg,
				AltBearingDeg: c.AltBearingDeg, Reference: northName(heading.True), BurstsUsed: c.BurstsUsed}
			first, last := math.Inf(1), math.Inf(-1)
			for _, i := range t.Bursts {
				bb := run.bbs[i]
				first, last = math.Min(first, bb.StartS), math.Max(last, ends[bb.Index])
			}
			if !info.Start.IsZero() && first <= last {
				b.First, b.Last = info.Start.Add(seconds(first)), info.Start.Add(seconds(last))
			}
			r.Bearings = append(r.Bearings, b)
			path := survey.PolarPlotPath(filepath.Join(outDir, "polar-"+st.Name+".png"), t.Ident)
			data, err := outs.ReadStaged(path)
			if err != nil {
				return err
			}
			r.Polars = append(r.Polars, report.Image{Caption: fmt.Sprintf("%s at %s (%s antenna)", t.Ident, st.Name, st.AntennaName), Data: data})
		}
	}
	for _, b := range sc.Beacons {
		r.Transmitters = append(r.Transmitters, report.Transmitter{Ident: b.ID, Bursts: heard[b.ID],
			Note: fmt.Sprintf("bearing at %d of %d stations", withBearing[b.ID], len(runs))})
	}
	if plan != nil {
		r.Schedule = report.ScheduleFromPlan(plan, "station "+runs[0].st.Name)
	}
	session.AddFixes(&r, fixes)
	written := append([]string(nil), fixes.Written...)
	sort.Strings(written)
	for _, p := range written {
		if ext := strings.ToLower(filepath.Ext(p)); ext != ".png" && ext != ".svg" {
			continue
		}
		data, err := outs.ReadStaged(p)
		if err != nil {
			return err
		}
		r.Maps = append(r.Maps, report.Image{Caption: "Map: stations, lines of position, fixes with their ellipses, event grid (" + filepath.Base(p) + ")", Data: data})
	}
	return outs.WriteFunc(filepath.Join(outDir, "report.html"), func(w io.Writer) error { return report.Write(w, r) })
}

func seconds(s float64) time.Duration { return time.Duration(math.Round(s * float64(time.Second))) }
