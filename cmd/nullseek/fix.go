package main

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"nullseek/internal/atomicfile"
	"os"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"nullseek/geo"
	"nullseek/mapplot"
)

func init() { rootCmd.AddCommand(newFixCmd()) }

type fixFlags struct {
	json        bool
	geojson     string
	kml         string
	mapFile     string
	grid        string
	gridFile    string
	probability float64
	declination float64
	cellSamples int
}

func newFixCmd() *cobra.Command {
	var o fixFlags
	cmd := &cobra.Command{
		Use:   "fix BEARINGS.csv|BEARINGS.json|- [MORE...]",
		Short: "Locate transmitters from bearings taken at two or more stations",
		Long: `Reads bearings (CSV with header ident,station,lat,lon,bearing_deg,sigma_deg,reference[,time][,declination_deg],
or the same keys as JSON) and prints, per ident, the most likely position, its error ellipse, the
Maidenhead locator, the event-grid cell and the most probable cells. Magnetic bearings are turned
to true with WMM2025 at the station and time unless a declination is given. Without --grid or
--grid-file an automatic north-up grid covering stations and fixes is used.
Exit status is 1 for bad input (nothing is written) and also when any transmitter could not be fixed.`,
		Args: cobra.MinimumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			return runFix(cmd.OutOrStdout(), args, o, cmd.Flags().Changed("declination"))
		},
	}
	f := cmd.Flags()
	f.BoolVar(&o.json, "json", false, "print one JSON object per transmitter instead of the table")
	f.StringVar(&o.geojson, "geojson", "", "write fixes, bearings, ellipses and grid as GeoJSON (RFC 7946) to `FILE`")
	f.StringVar(&o.kml, "kml", "", "write the same as KML to `FILE`")
	f.StringVar(&o.mapFile, "map", "", "draw a map to `FILE` (.png or .svg)")
	f.StringVar(&o.grid, "grid", "", `event grid, e.g. "origin=LAT,LON cell=250 rotation=0 cols=A-L rows=1-9 rowdir=down"`)
	f.StringVar(&o.gridFile, "grid-file", "", "event grid as a JSON `FILE` (origin_lat, origin_lon, cell_m, rotation_deg, cols, rows, row_direction)")
	f.Float64Var(&o.probability, "probability", 0.95, "probability of the error ellipse (0..1)")
	f.Float64Var(&o.declination, "declination", 0, "magnetic declination in `DEG` (east positive) for all magnetic bearings without their own declination_deg, instead of WMM2025")
	f.IntVar(&o.cellSamples, "cell-samples", 4, "samples per cell side when integrating cell probabilities")
	return cmd
}

func runFix(out io.Writer, inputs []string, o fixFlags, declSet bool) error {
	if !(o.probability > 0 && o.probability < 1) {
		return fmt.Errorf("--probability %v: must be between 0 and 1", o.probability)
	}
	// Bearings from several files (one per station, say) are fixed together.
	var recs []geo.BearingRecord
	for _, input := range inputs {
		r, err := readBearings(input)
		if err != nil {
			return err
		}
		recs = append(recs, r...)
	}
	grid, err := loadGrid(o.grid, o.gridFile)
	if err != nil {
		return err
	}
	var override *float64
	if declSet {
		override = &o.declination
	}
	decl := func(lat, lon float64, t time.Time) (float64, error) { return geo.Declination(lat, lon, 0, t) }
	lops, warns, err := geo.ResolveTrue(recs, override, decl, time.Now().UTC())
	if err != nil {
		return err
	}
	for _, w := range warns {
		slog.Warn(w)
	}
	idents, groups := geo.GroupByIdent(lops)
	var fixes []*geo.Fix
	var refused []error
	for _, id := range idents {
		f, err := geo.SolveFixAmbiguous(groups[id], geo.FixOptions{Probability: o.probability})
		if err != nil {
			refused = append(refused, err)
			continue
		}
		fixes = append(fixes, f)
	}
	if grid == nil && len(fixes) > 0 {
		grid = autoGrid(fixes)
	}
	for _, f := range fixes {
		if err := f.Place(grid, o.cellSamples); err != nil {
			return err
		}
	}
	if err := writeOutputs(fixes, grid, o); err != nil {
		return err
	}
	if o.json {
		enc := json.NewEncoder(out)
		for _, f := range fixes {
			if err := enc.Encode(f.Report()); err != nil {
				return err
			}
		}
		for _, e := range refused {
			_ = enc.Encode(map[string]string{"ident": identOf(e), "error": e.Error()})
		}
	} else {
		printFixTable(out, fixes, refused, grid)
	}
	if len(refused) > 0 {
		return fmt.Errorf("%d of %d transmitters could not be fixed", len(refused), len(idents))
	}
	return nil
}

// identOf recovers the ident from a SolveFix error ("IDENT: reason").
func identOf(err error) string {
	s, _, _ := strings.Cut(err.Error(), ": ")
	return s
}

func readBearings(input string) ([]geo.BearingRecord, error) {
	var data []byte
	var err error
	if input == "-" {
		data, err = io.ReadAll(os.Stdin)
	} else {
		data, err = os.ReadFile(input)
	}
	if err != nil {
		return nil, fmt.Errorf("read bearings: %w", err)
	}
	name := input
	if input == "-" {
		name = "stdin"
	}
	trim := bytes.TrimSpace(data)
	var recs []geo.BearingRecord
	if strings.HasSuffix(strings.ToLower(input), ".json") || (len(trim) > 0 && (trim[0] == '[' || trim[0] == '{')) {
		recs, err = geo.ReadBearingsJSON(bytes.NewReader(data))
	} else {
		recs, err = geo.ReadBearingsCSV(bytes.NewReader(data))
	}
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	return recs, nil
}

func loadGrid(spec, file string) (*geo.Grid, error) {
	switch {
	case spec != "" && file != "":
		return nil, errors.New("give --grid or --grid-file, not both")
	case spec != "":
		g, err := geo.ParseGrid(spec)
		if err != nil {
			return nil, fmt.Errorf("--grid: %w", err)
		}
		return g, nil
	case file != "":
		fh, err := os.Open(file)
		if err != nil {
			return nil, fmt.Errorf("--grid-file: %w", err)
		}
		defer fh.Close()
		g, err := geo.ReadGridJSON(fh)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", file, err)
		}
		return g, nil
	}
	return nil, nil
}

// autoGrid covers all stations and 95 % ellipses.
func autoGrid(fixes []*geo.Fix) *geo.Grid {
	var lats, lons []float64
	for _, f := range fixes {
		for _, p := range geo.EllipsePolygon(f, f.Ellipse, 16) {
			lats, lons = append(lats, p[0]), append(lons, p[1])
		}
		for _, b := range f.Bearings {
			lats, lons = append(lats, b.Lat), append(lons, b.Lon)
		}
	}
	return geo.AutoGrid(lats, lons, 16)
}

// writeOutputs renders every requested file in memory first, then writes
// each through a temporary file and a rename, so bad input never leaves a
// partial file behind.
func writeOutputs(fixes []*geo.Fix, grid *geo.Grid, o fixFlags) error {
	type file struct {
		path string
		data []byte
	}
	var files []file
	if o.geojson != "" {
		b, err := geo.GeoJSON(fixes, grid)
		if err != nil {
			return fmt.Errorf("geojson: %w", err)
		}
		files = append(files, file{o.geojson, append(b, '\n')})
	}
	if o.kml != "" {
		b, err := geo.KML(fixes, grid)
		if err != nil {
			return fmt.Errorf("kml: %w", err)
		}
		files = append(files, file{o.kml, b})
	}
	if o.mapFile != "" {
		format, err := mapplot.Format(o.mapFile)
		if err != nil {
			return err
		}
		if len(fixes) > 0 {
			b, err := mapplot.Render(fixes, grid, format, mapplot.Options{})
			if err != nil {
				return err
			}
			files = append(files, file{o.mapFile, b})
		}
	}
	for _, f := range files {
		if err := atomicfile.Write(f.path, f.data); err != nil {
			return err
		}
	}
	return nil
}

func printFixTable(out io.Writer, fixes []*geo.Fix, refused []error, grid *geo.Grid) {
	w := bufio.NewWriter(out)
	defer w.Flush()
	if grid != nil && grid.Auto {
		fmt.Fprintf(w, "(no event grid given; automatic grid: %s)\n\n", grid)
	}
	for _, f := range fixes {
		e, e1 := f.Ellipse, f.Ellipse1Sigma
		cell := f.GridCell
		if cell == "" {
			cell = "outside grid"
		}
		fmt.Fprintf(w, "%s\n", f.Ident)
		fmt.Fprintf(w, "  position    %s   (%.6f, %.6f)\n", geo.FormatLatLon(f.Lat, f.Lon), f.Lat, f.Lon)
		fmt.Fprintf(w, "  locator     %s    grid cell %s\n", f.Maidenhead, cell)
		fmt.Fprintf(w, "  ellipse     %.0f%%: %.0f m by %.0f m, long axis %.0f° true   (1 sigma: %.0f m by %.0f m)\n",
			100*e.Probability, e.SemiMajorM, e.SemiMinorM, e.OrientationDeg, e1.SemiMajorM, e1.SemiMinorM)
		if len(f.Cells) > 0 {
			var parts []string
			for _, c := range f.Cells {
				parts = append(parts, fmt.Sprintf("%s %.0f%%", c.Cell, 100*c.Probability))
			}
			fmt.Fprintf(w, "  cells       %s\n", strings.Join(parts, ", "))
		}
		if f.CockedHatM > 0 {
			fmt.Fprintf(w, "  cocked hat  %.0f m across\n", f.CockedHatM)
		}
		fmt.Fprintf(w, "  %-12s %8s %6s %9s %9s  %s\n", "station", "bearing", "sigma", "residual", "range", "status")
		for _, b := range f.Bearings {
			status := "used"
			if !b.Used {
				status = "REJECTED: " + b.Reason
			}
			fmt.Fprintf(w, "  %-12s %7.1f° %5.1f° %8.1f° %7.2fkm  %s\n", b.Station, b.BearingDeg, b.SigmaDeg, b.ResidualDeg, b.DistM/1e3, status)
		}
		for _, wn := range f.Warnings {
			fmt.Fprintf(w, "  warning: %s\n", wn)
		}
		fmt.Fprintln(w)
	}
	for _, e := range refused {
		fmt.Fprintf(w, "NO FIX  %v\n", e)
	}
}
