// Package session gathers a session's results from the files the other
// commands write (bearings files, fix --json lines, slots --json, pictures)
// into a report.Report and writes the page: the report command's job.
package session

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"time"

	"nullseek/geo"
	"nullseek/ident/schedule"
	"nullseek/internal/angle"
	"nullseek/internal/atomicfile"
	"nullseek/locate"
	"nullseek/report"
	"nullseek/survey"
)

// Options are the report command's inputs; errors name them by their
// flags.
type Options struct {
	Out      string   // --out: the page's file
	Title    string   // --title
	Fixes    string   // --fixes: the lines `fix --json` printed
	Grid     string   // --grid: event grid when the fixes are computed here
	Slots    string   // --slots: the object `slots --json` printed
	Maps     []string // --map: map pictures
	Polars   []string // --polar: glob patterns of polar plots
	Measured []string // --measured, per station: station=NAME,recording=…,antenna=…,heading=…,bearing-json=…
}

// measuredStation is one --measured value: what the page shows of the
// station, and the station's `bearing --json` output, if given.
type measuredStation struct {
	report.Station
	bearingJSON string
}

// maxReportBearings bounds the bearings the page lists one per row (a
// fixed station logging for hours makes many); the rest are counted.
const maxReportBearings = 1000

// measuredKeys are the keys of --measured after station=.
var measuredKeys = []string{"recording", "antenna", "heading", "bearing-json"}

// parseMeasured reads one --measured value.
func parseMeasured(s string) (measuredStation, error) {
	var st measuredStation
	seen := map[string]bool{}
	for _, part := range strings.Split(s, ",") {
		k, v, ok := strings.Cut(part, "=")
		k, v = strings.TrimSpace(k), strings.TrimSpace(v)
		if !ok || k == "" {
			return st, fmt.Errorf("--measured %q: %q is not KEY=VALUE", s, part)
		}
		if seen[k] {
			return st, fmt.Errorf("--measured %q: %s given twice", s, k)
		}
		seen[k] = true
		switch k {
		case "station":
			st.Name = v
		case "recording":
			st.Recording = v
		case "antenna":
			st.Antenna = v
		case "heading":
			st.HeadingSource = v
		case "bearing-json":
			st.bearingJSON = v
		default:
			return st, fmt.Errorf("--measured %q: unknown key %q (station and %s)", s, k, strings.Join(measuredKeys, ", "))
		}
	}
	if st.Name == "" {
		return st, fmt.Errorf("--measured %q: no station=NAME", s)
	}
	return st, nil
}

// readImage reads a picture file for the page, checking that it is PNG or SVG.
func readImage(flag, path string) (report.Image, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return report.Image{}, fmt.Errorf("%s: %w", flag, err)
	}
	if _, err := report.ImageType(b); err != nil {
		return report.Image{}, fmt.Errorf("%s %s: %w", flag, path, err)
	}
	return report.Image{Caption: filepath.Base(path), Data: b}, nil
}

// Run builds the page from inputs (bearings files) and o, writes it to
// o.Out (whole or not at all) and prints one summary line to out.
func Run(out io.Writer, inputs []string, o Options) error {
	if o.Out == "" {
		return errors.New("--out: give the page's file name")
	}
	if err := atomicfile.Check(o.Out); err != nil {
		return fmt.Errorf("--out: %w", err)
	}
	if o.Fixes != "" && o.Grid != "" {
		return errors.New("--grid is for fixes worked out here: not with --fixes")
	}
	var measured []measuredStation
	for _, m := range o.Measured {
		st, err := parseMeasured(m)
		if err != nil {
			return err
		}
		measured = append(measured, st)
	}
	var r report.Report
	r.Title, r.Generated = o.Title, time.Now().UTC()
	for _, p := range o.Maps {
		im, err := readImage("--map", p)
		if err != nil {
			return err
		}
		r.Maps = append(r.Maps, im)
	}
	for _, g := range o.Polars {
		paths, err := filepath.Glob(g)
		if err != nil {
			return fmt.Errorf("--polar %q: %w", g, err)
		}
		if len(paths) == 0 {
			return fmt.Errorf("--polar %q: no file matches", g)
		}
		for _, p := range paths {
			im, err := readImage("--polar", p)
			if err != nil {
				return err
			}
			r.Polars = append(r.Polars, im)
		}
	}
	if o.Slots != "" {
		plan, err := readSlots(o.Slots)
		if err != nil {
			return err
		}
		r.Schedule = report.ScheduleFromPlan(plan, filepath.Base(o.Slots))
	}
	if err := reportBearings(&r, inputs, measured); err != nil {
		return err
	}
	if o.Fixes != "" {
		if err := readFixLines(&r, o.Fixes); err != nil {
			return err
		}
	} else if err := fixForReport(&r, inputs, o.Grid); err != nil {
		return err
	}
	r.Notes = append(r.Notes, "Made by nullseek report from "+strings.Join(inputs, ", ")+".")
	if err := atomicfile.WriteFunc(o.Out, func(w io.Writer) error { return report.Write(w, r) }); err != nil {
		return err
	}
	_, err := fmt.Fprintf(out, "wrote %s: %d stations, %d transmitters, %d bearings, %d fixes, %d pictures\n",
		o.Out, len(r.Stations), len(r.Transmitters), len(r.Bearings), len(r.Fixes), len(r.Maps)+len(r.Polars))
	return err
}

func readSlots(path string) (*schedule.Plan, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("--slots: %w", err)
	}
	defer fh.Close()
	plan, err := schedule.ReadPlanJSON(fh)
	if err != nil {
		return nil, fmt.Errorf("--slots %s: %w", path, err)
	}
	return plan, nil
}

// reportBearings reads the bearings files into stations, transmitters and
// bearing rows, and joins --measured to the stations.
func reportBearings(r *report.Report, inputs []string, measured []measuredStation) error {
	stations := map[string]int{}
	txs := map[string]int{}
	listed := 0
	for _, in := range inputs {
		if in == "-" {
			return errors.New("report reads its bearings files twice (rows, then the fix): give a file, not -")
		}
		err := func() error {
			fh, err := os.Open(in)
			if err != nil {
				return fmt.Errorf("read bearings: %w", err)
			}
			defer fh.Close()
			br, err := geo.NewBearingReader(fh)
			if err != nil {
				return fmt.Errorf("%s: %w", in, err)
			}
			for {
				rec, err := br.Next()
				if err == io.EOF {
					break
				}
				if err != nil {
					return fmt.Errorf("%s: %w", in, err)
				}
				if _, ok := stations[rec.Station]; !ok {
					stations[rec.Station] = len(r.Stations)
					r.Stations = append(r.Stations, report.Station{Name: rec.Station, Lat: rec.Lat, Lon: rec.Lon})
				}
				if _, ok := txs[rec.Ident]; !ok {
					txs[rec.Ident] = len(r.Transmitters)
					r.Transmitters = append(r.Transmitters, report.Transmitter{Ident: rec.Ident})
				}
				if listed == maxReportBearings {
					continue
				}
				listed++
				b := report.Bearing{Ident: rec.Ident, Station: rec.Station, BearingDeg: rec.BearingDeg,
					SigmaDeg: rec.SigmaDeg, Reference: "true", First: rec.Time}
				if rec.Magnetic {
					b.Reference = "magnetic"
					if rec.HasDeclination {
						b.Reference = fmt.Sprintf("magnetic, declination %+.2f° (from the file)", rec.DeclinationDeg)
					}
				}
				if rec.Ambiguous {
					alt := angle.Wrap360(rec.BearingDeg + 180)
					b.AltBearingDeg = &alt
				}
				r.Bearings = append(r.Bearings, b)
			}
			if br.Count() == 0 {
				return fmt.Errorf("%s: no bearings", in)
			}
			return nil
		}()
		if err != nil {
			return err
		}
	}
	heardAt := map[string]map[string]bool{}
	for _, b := range r.Bearings {
		if heardAt[b.Ident] == nil {
			heardAt[b.Ident] = map[string]bool{}
		}
		heardAt[b.Ident][b.Station] = true
	}
	for i := range r.Transmitters {
		if n := len(heardAt[r.Transmitters[i].Ident]); n > 0 {
			r.Transmitters[i].Note = fmt.Sprintf("bearings from %d station(s)", n)
		}
	}
	if listed == maxReportBearings {
		r.Notes = append(r.Notes, fmt.Sprintf("Only the first %d bearings are listed; the fixes use them all.", maxReportBearings))
	}
	for _, m := range measured {
		i, ok := stations[m.Name]
		if !ok {
			return fmt.Errorf("--measured: station %q has no bearing in the inputs", m.Name)
		}
		s := &r.Stations[i]
		s.Recording, s.Antenna, s.HeadingSource = m.Recording, m.Antenna, m.HeadingSource
		if m.bearingJSON != "" {
			if err := burstsUsed(r, m.Name, m.bearingJSON); err != nil {
				return err
			}
		}
	}
	return nil
}

// burstsUsed fills the bursts used of station's bearings from what
// `bearing --json` printed for it (path). A bearing there that differs
// from the bearings file's row of the same transmitter by more than the
// files' 0.01° means the two are not of the same run: an error.
func burstsUsed(r *report.Report, station, path string) error {
	fh, err := os.Open(path)
	if err != nil {
		return fmt.Errorf("--measured bearing-json: %w", err)
	}
	defer fh.Close()
	sums, err := survey.ReadTxBearingsJSON(fh)
	if err != nil {
		return fmt.Errorf("--measured bearing-json %s: %w", path, err)
	}
	for _, s := range sums {
		if s.BearingDeg == nil {
			continue
		}
		for i := range r.Bearings {
			b := &r.Bearings[i]
			if b.Station != station || b.Ident != s.Ident {
				continue
			}
			if d := math.Abs(angle.Wrap180(b.BearingDeg - *s.BearingDeg)); d > 0.011 {
				return fmt.Errorf("--measured bearing-json %s: %s's bearing %.2f° is not the bearings file's %.2f° at station %q: not the same run",
					path, s.Ident, *s.BearingDeg, b.BearingDeg, station)
			}
			b.BurstsUsed = s.BurstsUsed
		}
	}
	return nil
}

// fixLine is the part of a `fix --json` line that tells its kind.
type fixLine struct {
	Type  string `json:"type"`
	Ident string `json:"ident"`
	Error string `json:"error"`
}

// readFixLines reads the lines `fix --json` printed (geo.FixReport lines
// and refusal lines).
func readFixLines(r *report.Report, path string) error {
	fh, err := os.Open(path)
	if err != nil {
		return fmt.Errorf("--fixes: %w", err)
	}
	defer fh.Close()
	dec := json.NewDecoder(fh)
	for n := 1; ; n++ {
		var raw json.RawMessage
		if err := dec.Decode(&raw); err == io.EOF {
			if n == 1 {
				return fmt.Errorf("--fixes %s: no fix lines", path)
			}
			return nil
		} else if err != nil {
			return fmt.Errorf("--fixes %s: entry %d: %w", path, n, err)
		}
		var l fixLine
		if err := json.Unmarshal(raw, &l); err != nil {
			return fmt.Errorf("--fixes %s: entry %d: %w", path, n, err)
		}
		switch l.Type {
		case "fix":
			var fr geo.FixReport
			if err := json.Unmarshal(raw, &fr); err != nil {
				return fmt.Errorf("--fixes %s: entry %d: %w", path, n, err)
			}
			r.Fixes = append(r.Fixes, report.FixFromReport(fr))
		case "refusal":
			r.Refusals = append(r.Refusals, report.Refusal{Ident: l.Ident, Reason: l.Error})
		default:
			return fmt.Errorf("--fixes %s: entry %d: type %q is neither fix nor refusal (not the output of fix --json?)", path, n, l.Type)
		}
	}
}

// fixForReport fixes the bearings as `fix` does with its defaults (and
// --grid), and notes the declinations used for magnetic bearings.
func fixForReport(r *report.Report, inputs []string, gridSpec string) error {
	grid, err := locate.LoadGrid(gridSpec, "")
	if err != nil {
		return err
	}
	var srcs []locate.Source
	for _, in := range inputs {
		fh, err := os.Open(in)
		if err != nil {
			return fmt.Errorf("read bearings: %w", err)
		}
		defer fh.Close()
		srcs = append(srcs, locate.Source{Name: in, R: fh})
	}
	res, err := locate.Run(srcs, locate.Options{Grid: grid})
	if err != nil {
		return err
	}
	AddFixes(r, res)
	for _, d := range res.Declinations {
		for i := range r.Bearings {
			if b := &r.Bearings[i]; b.Station == d.Station && b.Reference == "magnetic" {
				b.Reference = fmt.Sprintf("magnetic, declination %+.2f° (%s)", d.Deg, d.Source)
			}
		}
	}
	return nil
}

// AddFixes puts a fix run's fixes, refusals and notes on the page.
func AddFixes(r *report.Report, res *locate.Result) {
	for _, f := range res.Fixes {
		r.Fixes = append(r.Fixes, report.FixFromReport(f.Report()))
	}
	for _, x := range res.Refused {
		r.Refusals = append(r.Refusals, report.Refusal{Ident: x.Ident, Reason: x.Err.Error()})
	}
	var notes bytes.Buffer
	if err := res.WriteNotes(&notes, ""); err == nil {
		for _, line := range strings.Split(strings.TrimSpace(notes.String()), "\n") {
			if line = strings.TrimPrefix(line, "warning: "); line != "" {
				r.Warnings = append(r.Warnings, line)
			}
		}
	}
}

// seconds is s seconds as a duration, to the nanosecond.
func seconds(s float64) time.Duration { return time.Duration(math.Round(s * float64(time.Second))) }
