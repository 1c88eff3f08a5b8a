package main

import (
	"io"

	"github.com/spf13/cobra"

	"nullseek/locate"
	"nullseek/logbook"
)

type fixFlags struct {
	json     bool
	grid     string
	gridFile string
	mapSize  float64
	o        locate.Options
	sf       logbook.Flags
	qf       logbook.QueryFlags
}

func newFixCmd() *cobra.Command {
	var fl fixFlags
	d := locate.Defaults
	cmd := &cobra.Command{
		Use:   "fix BEARINGS.csv|BEARINGS.json|- [MORE...] | --db FILE",
		Short: "Locate transmitters from bearings taken at two or more stations",
		Long: `Reads bearings (CSV with header ident,station,lat,lon,bearing_deg,sigma_deg,reference[,time][,declination_deg][,ambiguous],
or the same keys as JSON) and prints, per ident, the most likely position, its error ellipse (semi-axes and full axes),
the Maidenhead locator, the event-grid cell and the most probable cells. Each transmitter is fixed on its own. Magnetic
bearings are turned to true with WMM2025 at the station and time unless a declination is given; the declinations used
are printed. Rows that repeat an earlier row exactly are reported and counted once. Without --grid or --grid-file an
automatic north-up grid, anchored on round coordinates, covers each cluster of nearby transmitters.
Exit status is 1 for bad input (nothing is written), and also when a transmitter could not be fixed or an output file
could not be made (the others are still printed and written).
With --db the fixes are stored there; without bearings files the bearings stored in --db are fixed (--from, --to,
--station-name, --ident select them).`,
		Args: cobra.ArbitraryArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			fl.o.DeclinationSet = cmd.Flags().Changed("declination")
			return runFix(cmd.InOrStdin(), cmd.OutOrStdout(), cmd.ErrOrStderr(), args, fl)
		},
	}
	f := cmd.Flags()
	f.BoolVar(&fl.json, "json", false, "print one JSON object per transmitter instead of the table")
	f.StringVar(&fl.o.GeoJSONPath, "geojson", "", "write fixes, bearings, ellipses and grid as GeoJSON (RFC 7946) to `FILE`")
	f.StringVar(&fl.o.KMLPath, "kml", "", "write the same as KML to `FILE`")
	f.StringVar(&fl.o.MapPath, "map", "", "draw a map to `FILE` (.png or .svg); far-apart clusters of transmitters get FILE-2, FILE-3, ...")
	f.Float64Var(&fl.mapSize, "map-size", d.Map.SizeCm, "side of the map in `CM` (2..200)")
	fl.o.AddUnderlayFlags(f)
	f.StringVar(&fl.grid, "grid", "", `event grid, e.g. "origin=LAT,LON cell=250 rotation=0 cols=A-L rows=1-9 rowdir=down"`)
	f.StringVar(&fl.gridFile, "grid-file", "", "event grid as a JSON `FILE` (origin_lat, origin_lon, cell_m, rotation_deg, cols, rows, row_direction)")
	f.Float64Var(&fl.o.Fix.Probability, "probability", d.Fix.Probability, "probability of the error ellipse (0..0.9999)")
	f.Float64Var(&fl.o.Fix.PoorCrossingDeg, "poor-crossing", d.Fix.PoorCrossingDeg, "warn when the lines cross at less than `DEG` (0..90)")
	f.Float64Var(&fl.o.DeclinationDeg, "declination", 0, "magnetic declination in `DEG` (east positive, -180..180) for all magnetic bearings without their own declination_deg, instead of WMM2025")
	f.IntVar(&fl.o.CellSamples, "cell-samples", d.CellSamples, "samples per cell side when integrating cell probabilities (1..64)")
	f.IntVar(&fl.o.AutoCells, "auto-cells", d.AutoCells, "about this many columns and rows in an automatic grid (4..200)")
	f.Float64Var(&fl.o.ClusterKm, "cluster-km", d.ClusterKm, "transmitters closer than `KM` share an automatic grid and a map (0.1..1000)")
	f.BoolVar(&fl.o.KeepDuplicates, "keep-duplicates", false, "count rows that repeat an earlier row exactly as separate bearings")
	fl.qf.Add(f)
	stationFile(cmd, &fl.sf, "db")
	return cmd
}

func runFix(stdin io.Reader, out, errOut io.Writer, inputs []string, fl fixFlags) error {
	o := fl.o
	o.Map.SizeCm = fl.mapSize
	for _, c := range []struct {
		name string
		v    float64
	}{{"probability", o.Fix.Probability}, {"poor-crossing", o.Fix.PoorCrossingDeg}, {"cell-samples", float64(o.CellSamples)},
		{"auto-cells", float64(o.AutoCells)}, {"cluster-km", o.ClusterKm}, {"map-size", o.Map.SizeCm}} {
		if err := zeroFlag(c.name, c.v); err != nil {
			return err
		}
	}
	grid, err := locate.LoadGrid(fl.grid, fl.gridFile)
	if err != nil {
		return err
	}
	o.Grid = grid
	if err := o.Validate(); err != nil {
		return err
	}
	// Bearings from several files (one per station, say) are fixed together.
	srcs, closeAll, err := locate.OpenFiles(inputs, stdin)
	defer closeAll()
	if srcs, err = fl.qf.FixSources(fl.sf.DB, srcs, err); err != nil {
		return err
	}
	res, err := locate.Run(srcs, o)
	if err != nil {
		return err
	}
	if err := fl.sf.SaveFixes(errOut, res, &fl.qf); err != nil {
		return err
	}
	if fl.json {
		if err := res.WriteJSON(out); err != nil {
			return err
		}
		if err := res.WriteNotes(errOut, "nullseek: "); err != nil {
			return err
		}
	} else if err := res.WriteTable(out); err != nil {
		return err
	}
	return res.Err()
}
