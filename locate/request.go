package locate

import (
	"io"

	"github.com/spf13/pflag"

	"nullseek/internal/units"
)

// Request is the fix command's settings as its flags give them (Add, with
// the defaults of Defaults): Options, plus the grid as text or file, the
// map size and the output form. Prepare checks them into Options; Print
// prints a Result in the chosen form.
type Request struct {
	Options
	JSON           bool
	Grid, GridFile string
	MapSizeCm      float64
	fs             *pflag.FlagSet
}

// Add adds fix's flags to fs.
func (r *Request) Add(f *pflag.FlagSet) {
	d, o := Defaults, &r.Options
	r.fs = f
	f.BoolVar(&r.JSON, "json", false, "print one JSON object per transmitter instead of the table")
	f.StringVar(&o.GeoJSONPath, "geojson", "", "write fixes, bearings, ellipses and grid as GeoJSON (RFC 7946) to `FILE`")
	f.StringVar(&o.KMLPath, "kml", "", "write the same as KML to `FILE`")
	f.StringVar(&o.MapPath, "map", "", "draw a map to `FILE` (.png or .svg); far-apart clusters of transmitters get FILE-2, FILE-3, ...")
	f.Float64Var(&r.MapSizeCm, "map-size", d.Map.SizeCm, "side of the map in `CM` (2..200)")
	o.AddUnderlayFlags(f)
	f.StringVar(&r.Grid, "grid", "", `event grid, e.g. "origin=LAT,LON cell=250 rotation=0 cols=A-L rows=1-9 rowdir=down"`)
	f.StringVar(&r.GridFile, "grid-file", "", "event grid as a JSON `FILE` (origin_lat, origin_lon, cell_m, rotation_deg, cols, rows, row_direction)")
	f.Float64Var(&o.Fix.Probability, "probability", d.Fix.Probability, "probability of the error ellipse (0..0.9999)")
	f.Float64Var(&o.Fix.PoorCrossingDeg, "poor-crossing", d.Fix.PoorCrossingDeg, "warn when the lines cross at less than `DEG` (0..90)")
	f.Float64Var(&o.DeclinationDeg, "declination", 0, "magnetic declination in `DEG` (east positive, -180..180) for all magnetic bearings without their own declination_deg, instead of WMM2025")
	f.IntVar(&o.CellSamples, "cell-samples", d.CellSamples, "samples per cell side when integrating cell probabilities (1..64)")
	f.IntVar(&o.AutoCells, "auto-cells", d.AutoCells, "about this many columns and rows in an automatic grid (4..200)")
	f.Float64Var(&o.ClusterKm, "cluster-km", d.ClusterKm, "transmitters closer than `KM` share an automatic grid and a map (0.1..1000)")
	f.BoolVar(&o.KeepDuplicates, "keep-duplicates", false, "count rows that repeat an earlier row exactly as separate bearings")
}

// Prepare checks the request into the options of a run: 0 is refused
// where it would silently mean the default, the grid is read (LoadGrid),
// and Options.Validate checks the rest.
func (r *Request) Prepare() (Options, error) {
	o := r.Options
	o.Map.SizeCm = r.MapSizeCm
	if r.fs != nil {
		o.DeclinationSet = r.fs.Changed("declination")
	}
	for _, c := range []struct {
		name string
		v    float64
	}{{"probability", o.Fix.Probability}, {"poor-crossing", o.Fix.PoorCrossingDeg}, {"cell-samples", float64(o.CellSamples)},
		{"auto-cells", float64(o.AutoCells)}, {"cluster-km", o.ClusterKm}, {"map-size", o.Map.SizeCm}} {
		if err := units.NonZeroFlag(c.name, c.v); err != nil {
			return o, err
		}
	}
	grid, err := LoadGrid(r.Grid, r.GridFile)
	if err != nil {
		return o, err
	}
	o.Grid = grid
	return o, o.Validate()
}

// Print prints res as the table or, with JSON, as JSON lines with the
// notes on errOut (each led by "nullseek: "); the error is res.Err when
// printing succeeded.
func (r *Request) Print(res *Result, out, errOut io.Writer) error {
	if r.JSON {
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
