package locate

import (
	"bufio"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"sort"
	"strings"
	"unicode/utf8"

	"nullseek/geo"
)

// maxBearingLines is how many bearings a fix's table lists one per line;
// beyond it the table gives one line per station and lists only rejected
// bearings (at most maxBearingLines of them).
const maxBearingLines = 30

// WriteNotes prints the run's notes, one a line, each after prefix: the
// declinations used for magnetic bearings, the warnings, the automatic
// grids and the outputs that could not be made. WriteTable starts with
// them.
func (res *Result) WriteNotes(out io.Writer, prefix string) error {
	var b strings.Builder
	res.notes(&b)
	for _, e := range res.OutputErrors {
		fmt.Fprintf(&b, "warning: %v\n", e)
	}
	w := bufio.NewWriter(out)
	for _, line := range strings.Split(strings.TrimSuffix(b.String(), "\n"), "\n") {
		if line != "" {
			fmt.Fprintf(w, "%s%s\n", prefix, line)
		}
	}
	return w.Flush()
}

func (res *Result) notes(w io.Writer) {
	for _, d := range res.Declinations {
		fmt.Fprintf(w, "declination %s for %d magnetic bearing(s) at %s (%s)\n", fmtDecl(d.Deg), d.Bearings, d.Station, d.Source)
	}
	for _, wn := range res.Warnings {
		fmt.Fprintf(w, "warning: %s\n", wn)
	}
	for _, g := range res.Grids {
		if g.Auto {
			fmt.Fprintf(w, "(no event grid given; automatic grid: %s)\n", g)
		}
	}
}

// WriteTable prints the result for people: the run's notes, then per fix
// its position, locator, grid and cells, the ellipse (semi-axes and full
// axes), the crossing angle and the bearings, then the refusals.
func (res *Result) WriteTable(out io.Writer) error {
	w := bufio.NewWriter(out)
	res.notes(w)
	if len(res.Declinations)+len(res.Warnings)+len(res.Grids) > 0 {
		fmt.Fprintln(w)
	}
	for _, f := range res.Fixes {
		writeFix(w, f, len(res.Grids) > 1)
	}
	for _, r := range res.Refused {
		fmt.Fprintf(w, "NO FIX  %v\n", r.Err)
	}
	for _, e := range res.OutputErrors {
		fmt.Fprintf(w, "warning: %v\n", e)
	}
	return w.Flush()
}

func fmtDecl(d float64) string {
	if d < 0 {
		return fmt.Sprintf("%.2f° W", -d)
	}
	return fmt.Sprintf("%.2f° E", d)
}

func writeFix(w io.Writer, f *geo.Fix, nameGrid bool) {
	e, e1 := f.Ellipse, f.Ellipse1Sigma
	cell := f.GridCell
	if cell == "" {
		cell = "outside grid"
		if f.Grid == nil {
			cell = "none (no grid)"
		}
	}
	fmt.Fprintf(w, "%s\n", f.Ident)
	fmt.Fprintf(w, "  position    %s   (%.6f, %.6f)\n", geo.FormatLatLon(f.Lat, f.Lon), f.Lat, f.Lon)
	fmt.Fprintf(w, "  locator     %s    grid cell %s\n", f.Maidenhead, cell)
	if nameGrid && f.Grid != nil {
		fmt.Fprintf(w, "  grid        %s\n", f.Grid)
	}
	fmt.Fprintf(w, "  ellipse     %.0f%%: semi-axes %.0f m and %.0f m (full axes %.0f m by %.0f m), long axis %.0f° true   (1 sigma semi-axes: %.0f m and %.0f m)\n",
		100*e.Probability, e.SemiMajorM, e.SemiMinorM, 2*e.SemiMajorM, 2*e.SemiMinorM, e.OrientationDeg, e1.SemiMajorM, e1.SemiMinorM)
	fmt.Fprintf(w, "  crossing    %.0f° widest, %d stations\n", f.CrossingDeg, f.Stations)
	if len(f.Cells) > 0 {
		var parts []string
		for _, c := range f.Cells {
			parts = append(parts, fmt.Sprintf("%s %.0f%%", c.Cell, 100*c.Probability))
		}
		fmt.Fprintf(w, "  cells       %s\n", strings.Join(parts, ", "))
	}
	if f.HasCockedHat {
		fmt.Fprintf(w, "  cocked hat  %.0f m across\n", f.CockedHatM)
	}
	sw := stationWidth(f.Bearings)
	if len(f.Bearings) <= maxBearingLines {
		fmt.Fprintf(w, "  %-*s %14s %6s %9s %9s  %s\n", sw, "station", "bearing (true)", "sigma", "residual", "range", "status")
		for _, b := range f.Bearings {
			writeBearing(w, b, sw)
		}
	} else {
		writeStations(w, f, sw)
	}
	for _, wn := range f.Warnings {
		fmt.Fprintf(w, "  warning: %s\n", wn)
	}
	fmt.Fprintln(w)
}

// stationWidth is the station column's width: the longest name (a
// station named by its coordinates is 17 characters), at least 12.
func stationWidth(bs []geo.BearingUse) int {
	n := 12
	for _, b := range bs {
		n = max(n, utf8.RuneCountInString(b.Station))
	}
	return n
}

func writeBearing(w io.Writer, b geo.BearingUse, sw int) {
	status := "used"
	if !b.Used {
		status = "REJECTED: " + b.Reason
	}
	fmt.Fprintf(w, "  %-*s %13.1f° %5.1f° %8.1f° %7.2fkm  %s\n", sw, b.Station, b.BearingDeg, b.SigmaDeg, b.ResidualDeg, b.DistM/1e3, status)
}

// writeStations prints one line per station (bearings, used, weighted mean
// residual, range) and the rejected bearings.
func writeStations(w io.Writer, f *geo.Fix, sw int) {
	type acc struct {
		n, used  int
		sw, swr  float64
		distM    float64
		firstIdx int
	}
	m := map[string]*acc{}
	var names []string
	var rejected []geo.BearingUse
	for i, b := range f.Bearings {
		a := m[b.Station]
		if a == nil {
			a = &acc{firstIdx: i}
			m[b.Station] = a
			names = append(names, b.Station)
		}
		a.n++
		a.distM = b.DistM
		if b.Used {
			a.used++
			wt := 1 / (b.SigmaDeg * b.SigmaDeg)
			a.sw += wt
			a.swr += wt * b.ResidualDeg
		} else {
			rejected = append(rejected, b)
		}
	}
	sort.SliceStable(names, func(i, j int) bool { return m[names[i]].firstIdx < m[names[j]].firstIdx })
	fmt.Fprintf(w, "  %-*s %8s %6s %14s %9s\n", sw, "station", "bearings", "used", "mean residual", "range")
	for _, n := range names {
		a := m[n]
		mr := "-"
		if a.sw > 0 {
			mr = fmt.Sprintf("%.2f°", a.swr/a.sw)
		}
		fmt.Fprintf(w, "  %-*s %8d %6d %14s %7.2fkm\n", sw, n, a.n, a.used, mr, a.distM/1e3)
	}
	if len(rejected) > 0 {
		fmt.Fprintf(w, "  %d rejected:\n", len(rejected))
		for i, b := range rejected {
			if i == maxBearingLines {
				fmt.Fprintf(w, "  … and %d more (see --json)\n", len(rejected)-i)
				break
			}
			writeBearing(w, b, sw)
		}
	}
}

// refusalLine is a refused transmitter in the JSON output.
type refusalLine struct {
	Type  string `json:"type"` // "refusal"
	Ident string `json:"ident"`
	Error string `json:"error"`
}

// WriteJSON prints one JSON object a line: each fix (geo.FixReport, type
// "fix", with its grid) and each refusal (type "refusal": ident, error).
// The run's notes (declinations, duplicates, warnings, outputs not
// written) are not JSON: print them with WriteNotes. No NaN or Inf is
// written: a fix whose numbers are not finite is written as a refusal.
func (res *Result) WriteJSON(out io.Writer) error {
	w := bufio.NewWriter(out)
	enc := json.NewEncoder(w)
	for _, f := range res.Fixes {
		rep := f.Report()
		if b, err := json.Marshal(rep); err != nil || !finiteFix(f) {
			if err == nil {
				err = fmt.Errorf("a number is not finite")
			}
			if err := enc.Encode(refusalLine{"refusal", f.Ident, fmt.Sprintf("%s: fix not reported: %v", f.Ident, err)}); err != nil {
				return err
			}
			continue
		} else if _, err := w.Write(append(b, '\n')); err != nil {
			return err
		}
	}
	for _, r := range res.Refused {
		if err := enc.Encode(refusalLine{"refusal", r.Ident, r.Err.Error()}); err != nil {
			return err
		}
	}
	return w.Flush()
}

func finiteFix(f *geo.Fix) bool {
	for _, v := range []float64{f.Lat, f.Lon, f.Ellipse.SemiMajorM, f.Ellipse.SemiMinorM, f.Ellipse.OrientationDeg,
		f.Ellipse1Sigma.SemiMajorM, f.Ellipse1Sigma.SemiMinorM, f.Chi2, f.VarianceFactor, f.CrossingDeg} {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return false
		}
	}
	return true
}
