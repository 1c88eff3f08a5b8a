// Package locate is the fix pipeline behind `nullseek fix` and the demo:
// bearings in (files, streamed, or LOPs), one fix per transmitter, an event
// grid (the user's, or an automatic one per cluster of nearby
// transmitters), the grid cells, and the optional GeoJSON, KML and map
// files. Options holds every setting with its default (Defaults) and
// Validate; Run and RunLOPs are the entry points; Result carries what was
// found and prints itself (WriteTable, WriteJSON).
//
// Failure rules: bad input stops the run before anything is written (one
// error naming file, row and field). A transmitter that cannot be fixed is
// a refusal in the result, not an error, and the others are still fixed.
// An optional output that cannot be made (a map that fails, a file that
// cannot be written) is reported in Result.OutputErrors and the rest is
// still written; when no transmitter is fixed no file is written.
package locate

import (
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/spf13/pflag"

	"nullseek/geo"
	"nullseek/internal/atomicfile"
	"nullseek/mapplot"
)

// Options configures a run. Zero numeric fields take the value in Defaults.
type Options struct {
	// Fix tunes each transmitter's fix (ellipse probability and the rest).
	Fix geo.FixOptions
	// DeclinationDeg (east positive, −180..180) replaces WMM2025 for the
	// magnetic bearings that carry no declination of their own, when
	// DeclinationSet.
	DeclinationDeg float64
	DeclinationSet bool
	// Grid is the event grid for every transmitter; nil: an automatic grid
	// per cluster of nearby transmitters.
	Grid *geo.Grid
	// AutoCells is about how many columns and rows an automatic grid has;
	// 4..200, default 16.
	AutoCells int
	// CellSamples is the samples per cell side when integrating cell
	// probabilities; 1..64, default 4 (and cells × samples² is bounded by
	// geo.MaxProbMapSamples).
	CellSamples int
	// ClusterKm: transmitters whose areas (stations and ellipses) come
	// closer than this share an automatic grid and a map; 0.1..1000 km,
	// default 20 km.
	ClusterKm float64
	// KeepDuplicates counts a row that repeats an earlier one exactly as a
	// bearing of its own; by default it is counted once (and reported).
	KeepDuplicates bool
	// GeoJSONPath, KMLPath, MapPath name the optional outputs ("" for
	// none). With several clusters of transmitters the map is drawn once per
	// cluster: the first to MapPath, the others to MapPath with -2, -3, …
	// before the extension.
	GeoJSONPath, KMLPath, MapPath string
	// Map sizes the map (mapplot.Options; Title, ColorOf and Underlay are
	// set here).
	Map mapplot.Options
	// Underlay names a georeferenced picture drawn under the map (fix's
	// --underlay and --underlay-ref, AddUnderlayFlags); it is read before
	// any bearing. A picture that covers none of the map is bad input: the
	// run stops with nothing written. With several maps (clusters), one it
	// misses is drawn without it, with a warning.
	Underlay mapplot.UnderlaySpec
	// Now is the time used for magnetic bearings without a time; zero:
	// the clock.
	Now time.Time
	// Stage, when not nil, receives the output files instead of their being
	// written at once: the caller commits them with the rest of its run's
	// outputs (atomicfile.Set.Commit). Nil: each file is written on its own
	// (temporary file and rename), and one that fails leaves the others.
	Stage *atomicfile.Set
}

// Defaults holds the default of every numeric option.
var Defaults = Options{Fix: geo.DefaultFixOptions, AutoCells: 16, CellSamples: 4, ClusterKm: 20, Map: mapplot.Defaults}

func (o Options) withDefaults() Options {
	d := Defaults
	if o.AutoCells == 0 {
		o.AutoCells = d.AutoCells
	}
	if o.CellSamples == 0 {
		o.CellSamples = d.CellSamples
	}
	if o.ClusterKm == 0 {
		o.ClusterKm = d.ClusterKm
	}
	return o
}

// Validate checks every field against its documented range, with one error
// naming the option (and its `fix` flag).
func (o Options) Validate() error {
	if err := o.Fix.Validate(); err != nil {
		return err
	}
	if o.DeclinationSet && !(o.DeclinationDeg >= -180 && o.DeclinationDeg <= 180) {
		return fmt.Errorf("declination (--declination) %v is outside -180..180 degrees", o.DeclinationDeg)
	}
	if o.AutoCells != 0 && (o.AutoCells < 4 || o.AutoCells > 200) {
		return fmt.Errorf("automatic grid cells (--auto-cells) %d is outside 4..200", o.AutoCells)
	}
	if o.CellSamples != 0 && (o.CellSamples < 1 || o.CellSamples > 64) {
		return fmt.Errorf("samples per cell side (--cell-samples) %d is outside 1..64", o.CellSamples)
	}
	if o.ClusterKm != 0 && !(o.ClusterKm >= 0.1 && o.ClusterKm <= 1000) {
		return fmt.Errorf("cluster distance (--cluster-km) %v is outside 0.1..1000 km", o.ClusterKm)
	}
	if err := o.Map.Validate(); err != nil {
		return fmt.Errorf("%w (--map-size)", err)
	}
	if o.Underlay.Path != "" && o.MapPath == "" {
		return errors.New("--underlay is drawn under the map: give --map FILE too")
	}
	if o.MapPath != "" {
		if _, err := mapplot.Format(o.MapPath); err != nil {
			return fmt.Errorf("--map: %w", err)
		}
	}
	// A target that can never be a file (a FIFO, a folder) is bad input,
	// refused before any work; a missing folder or a full disk is found
	// when writing, and reported with the outputs that could be made.
	for _, out := range []struct{ flag, path string }{{"--geojson", o.GeoJSONPath}, {"--kml", o.KMLPath}, {"--map", o.MapPath}} {
		if out.path != "" {
			if err := atomicfile.Check(out.path); err != nil {
				return fmt.Errorf("%s: %w", out.flag, err)
			}
		}
	}
	if o.Grid != nil {
		if err := o.Grid.Validate(); err != nil {
			return fmt.Errorf("event grid: %w", err)
		}
		sub := o.withDefaults().CellSamples
		if n := float64(o.Grid.Cols) * float64(o.Grid.Rows) * float64(sub*sub); n > geo.MaxProbMapSamples {
			return fmt.Errorf("event grid of %d×%d cells with %d×%d samples a cell (--cell-samples) is %.3g evaluations, more than %.0e: use fewer samples or a smaller grid",
				o.Grid.Cols, o.Grid.Rows, sub, sub, n, float64(geo.MaxProbMapSamples))
		}
	}
	return nil
}

// Source is one bearings input: CSV or JSON (see geo.NewBearingReader).
type Source struct {
	Name string // for messages, e.g. the file name or "stdin"
	R    io.Reader
}

// Refusal is a transmitter that could not be fixed.
type Refusal struct {
	Ident string
	Err   error
}

// Result is what a run found.
type Result struct {
	// Rows is the number of bearing rows read (duplicates included).
	Rows int
	// Duplicates counts rows that repeat an earlier row exactly; they were
	// counted once unless Options.KeepDuplicates. DupFirst and DupOf name
	// the first repeat and the row it repeats, DupSource its input.
	Duplicates      int
	DupFirst, DupOf int
	DupSource       string
	DuplicatesKept  bool
	// Declinations lists the declinations turned into true bearings.
	Declinations []geo.DeclinationUse
	Fixes        []*geo.Fix
	Refused      []Refusal
	// Grids are the grids in use (the user's, or one per cluster).
	Grids []*geo.Grid
	// Warnings concern the whole run (input, declination model, grids).
	Warnings []string
	// Written lists the output files written; OutputErrors those that
	// could not be made.
	Written      []string
	OutputErrors []error
}

// Run reads every source (streamed: one bearing at a time, each
// transmitter's bearings kept compactly), then fixes, places and writes as
// RunLOPs does.
func Run(srcs []Source, o Options) (*Result, error) {
	if err := o.Validate(); err != nil {
		return nil, err
	}
	o = o.withDefaults()
	if err := o.loadUnderlay(); err != nil {
		return nil, err
	}
	if o.Now.IsZero() {
		o.Now = time.Now().UTC()
	}
	res := &Result{DuplicatesKept: o.KeepDuplicates}
	rv := &geo.Resolver{Decl: func(lat, lon float64, t time.Time) (float64, error) { return geo.Declination(lat, lon, 0, t) }, Now: o.Now}
	if o.DeclinationSet {
		d := o.DeclinationDeg
		rv.Override = &d
	}
	var order []string
	groups := map[string][]geo.LOP{}
	names := map[string]string{} // interned idents and station names
	intern := func(s string) string {
		if v, ok := names[s]; ok {
			return v
		}
		s = strings.Clone(s)
		names[s] = s
		return s
	}
	for _, src := range srcs {
		br, err := geo.NewBearingReader(src.R)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", src.Name, err)
		}
		dups := &geo.Duplicates{}
		for {
			rec, err := br.Next()
			if err == io.EOF {
				break
			}
			if err != nil {
				return nil, fmt.Errorf("%s: %w", src.Name, err)
			}
			res.Rows++
			if dup, _ := dups.Seen(rec); dup && !o.KeepDuplicates {
				continue
			}
			l, err := rv.True(rec)
			if err != nil {
				return nil, fmt.Errorf("%s: %w", src.Name, err)
			}
			l.Ident, l.Station = intern(l.Ident), intern(l.Station)
			if _, ok := groups[l.Ident]; !ok {
				order = append(order, l.Ident)
			}
			groups[l.Ident] = append(groups[l.Ident], l)
		}
		if br.Count() == 0 {
			what := "no bearing rows after the header"
			if br.Unit() != "row" {
				what = "no bearing entries"
			}
			return nil, fmt.Errorf("%s: %s: nothing to fix", src.Name, what)
		}
		if dups.Count > 0 {
			if res.Duplicates == 0 {
				res.DupFirst, res.DupOf, res.DupSource = dups.First, dups.FirstOf, src.Name
			}
			res.Duplicates += dups.Count
		}
	}
	res.Warnings = append(res.Warnings, rv.Warnings()...)
	res.Declinations = rv.Used()
	if res.Duplicates > 0 {
		how := "each counted once (give --keep-duplicates to count every row)"
		if o.KeepDuplicates {
			how = "kept as separate bearings (--keep-duplicates): they shrink the ellipse as if they were independent"
		}
		res.Warnings = append(res.Warnings, fmt.Sprintf("%d rows repeat an earlier row exactly (first: %s row %d repeats row %d); %s",
			res.Duplicates, res.DupSource, res.DupFirst, res.DupOf, how))
	}
	return res, res.solve(order, groups, o)
}

// RunLOPs fixes bearings already in hand (true bearings), places each fix
// on its grid and writes the requested outputs.
func RunLOPs(lops []geo.LOP, o Options) (*Result, error) {
	if err := o.Validate(); err != nil {
		return nil, err
	}
	o = o.withDefaults()
	if err := o.loadUnderlay(); err != nil {
		return nil, err
	}
	idents, groups := geo.GroupByIdent(lops)
	res := &Result{Rows: len(lops)}
	return res, res.solve(idents, groups, o)
}

func (res *Result) solve(order []string, groups map[string][]geo.LOP, o Options) error {
	for _, id := range order {
		f, err := geo.SolveFixAmbiguous(groups[id], o.Fix)
		groups[id] = nil // the fix holds its own copy
		if err != nil {
			res.Refused = append(res.Refused, Refusal{Ident: id, Err: err})
			continue
		}
		res.Fixes = append(res.Fixes, f)
	}
	clusters := res.clusters(o.ClusterKm)
	gridOf := make([]*geo.Grid, len(clusters))
	for c, members := range clusters {
		g := o.Grid
		if g == nil {
			g = autoGrid(res.Fixes, members, o.AutoCells)
			if g == nil {
				continue
			}
			if err := g.Validate(); err != nil {
				var ids []string
				for _, i := range members {
					ids = append(ids, res.Fixes[i].Ident)
				}
				res.Warnings = append(res.Warnings, fmt.Sprintf("no automatic grid for %s (%v): give one with --grid", strings.Join(ids, ", "), err))
				g = nil
			}
		}
		gridOf[c] = g
		if g != nil && (len(res.Grids) == 0 || res.Grids[len(res.Grids)-1] != g) {
			res.Grids = append(res.Grids, g)
		}
		for _, i := range members {
			f := res.Fixes[i]
			if err := f.Place(g, o.CellSamples); err != nil {
				f.Warnings = append(f.Warnings, "no grid cells: "+err.Error())
				if err2 := f.Place(nil, 1); err2 != nil {
					f.Warnings = append(f.Warnings, err2.Error())
				}
			}
		}
	}
	return res.writeOutputs(clusters, gridOf, o)
}

// loadUnderlay reads the underlay picture into o.Map.
func (o *Options) loadUnderlay() error {
	u, err := o.Underlay.Load()
	if err != nil {
		return err
	}
	o.Map.Underlay = u
	return nil
}

// AddUnderlayFlags registers fix's underlay flags, filling o.Underlay.
func (o *Options) AddUnderlayFlags(f *pflag.FlagSet) {
	f.StringVar(&o.Underlay.Path, "underlay", "", "draw the PNG or JPEG `FILE` (an event's own map) under the --map, placed by --underlay-ref or by a world file beside it")
	f.StringVar(&o.Underlay.Ref, "underlay-ref", "", "the underlay's georeference `SPEC`: \"sw=LAT,LON ne=LAT,LON\" (outer corners of a picture gridded in latitude and longitude) or \"world[=FILE] [crs=lonlat|utm:ZONE{N|S}]\" (ESRI world file; default the one beside the picture, in degrees)")
}

// clusters groups the fixes whose areas (the fix, its stations, its
// ellipse) come closer than clusterKm, single linkage; each cluster lists
// fix indices in order.
func (res *Result) clusters(clusterKm float64) [][]int {
	n := len(res.Fixes)
	radius := make([]float64, n)
	for i, f := range res.Fixes {
		r := f.Ellipse.SemiMajorM
		if math.IsNaN(r) || math.IsInf(r, 0) {
			r = 0
		}
		for _, b := range f.Bearings {
			r = math.Max(r, b.DistM)
		}
		radius[i] = r
	}
	parent := make([]int, n)
	for i := range parent {
		parent[i] = i
	}
	var find func(int) int
	find = func(i int) int {
		if parent[i] != i {
			parent[i] = find(parent[i])
		}
		return parent[i]
	}
	for i := 0; i < n; i++ {
		for j := i + 1; j < n; j++ {
			d, _, _ := geo.Inverse(res.Fixes[i].Lat, res.Fixes[i].Lon, res.Fixes[j].Lat, res.Fixes[j].Lon)
			if d-radius[i]-radius[j] < clusterKm*1e3 {
				parent[find(j)] = find(i)
			}
		}
	}
	var out [][]int
	index := map[int]int{}
	for i := 0; i < n; i++ {
		r := find(i)
		k, ok := index[r]
		if !ok {
			k = len(out)
			index[r] = k
			out = append(out, nil)
		}
		out[k] = append(out[k], i)
	}
	return out
}

// autoGrid covers the stations and 95 % ellipses of some fixes.
func autoGrid(fixes []*geo.Fix, members []int, cells int) *geo.Grid {
	var lats, lons []float64
	for _, i := range members {
		f := fixes[i]
		for _, p := range geo.EllipsePolygon(f, f.Ellipse, 16) {
			lats, lons = append(lats, p[0]), append(lons, p[1])
		}
		seen := map[[2]float64]bool{}
		for _, b := range f.Bearings {
			if k := [2]float64{b.Lat, b.Lon}; !seen[k] && b.Validate() == nil {
				seen[k] = true
				lats, lons = append(lats, b.Lat), append(lons, b.Lon)
			}
		}
	}
	return geo.AutoGrid(lats, lons, cells)
}

// writeOutputs renders each requested file, then writes each through a
// temporary file and a rename. One that fails is reported and the rest go
// on. Without a fix nothing is written. An underlay that covers none of
// the maps is an error and nothing is written.
func (res *Result) writeOutputs(clusters [][]int, gridOf []*geo.Grid, o Options) error {
	if o.GeoJSONPath == "" && o.KMLPath == "" && o.MapPath == "" {
		return nil
	}
	if len(res.Fixes) == 0 {
		res.OutputErrors = append(res.OutputErrors, errors.New("no output files written: no transmitter could be fixed"))
		return nil
	}
	type rendered struct {
		path string
		b    []byte
	}
	var outs []rendered
	render := func(path string, f func() ([]byte, error)) {
		b, err := f()
		if err != nil {
			res.OutputErrors = append(res.OutputErrors, fmt.Errorf("%s not written: %w", path, err))
			return
		}
		outs = append(outs, rendered{path, b})
	}
	if o.GeoJSONPath != "" {
		render(o.GeoJSONPath, func() ([]byte, error) {
			b, err := geo.GeoJSON(res.Fixes, res.Grids...)
			return append(b, '\n'), err
		})
	}
	if o.KMLPath != "" {
		render(o.KMLPath, func() ([]byte, error) { return geo.KML(res.Fixes, res.Grids...) })
	}
	if o.MapPath != "" {
		format, _ := mapplot.Format(o.MapPath) // checked by Validate
		colorOf := map[string]int{}
		for i, f := range res.Fixes {
			colorOf[f.Ident] = i
		}
		var missed []error
		for c, members := range clusters {
			path := o.MapPath
			if c > 0 {
				ext := filepath.Ext(path)
				path = fmt.Sprintf("%s-%d%s", strings.TrimSuffix(path, ext), c+1, ext)
			}
			var fixes []*geo.Fix
			for _, i := range members {
				fixes = append(fixes, res.Fixes[i])
			}
			mo := o.Map
			mo.ColorOf = colorOf
			render(path, func() ([]byte, error) {
				b, err := mapplot.Render(fixes, gridOf[c], format, mo)
				if errors.Is(err, mapplot.ErrUnderlayOutside) {
					missed = append(missed, err)
					mo.Underlay = nil
					b, err = mapplot.Render(fixes, gridOf[c], format, mo)
					res.Warnings = append(res.Warnings, fmt.Sprintf("%s is drawn without the underlay: %v", path, missed[len(missed)-1]))
				}
				return b, err
			})
		}
		if len(missed) == len(clusters) {
			res.Warnings = res.Warnings[:len(res.Warnings)-len(missed)]
			return missed[0]
		}
	}
	for _, r := range outs {
		var err error
		if o.Stage != nil {
			err = o.Stage.Write(r.path, r.b)
		} else {
			err = atomicfile.Write(r.path, r.b)
		}
		if err != nil {
			res.OutputErrors = append(res.OutputErrors, fmt.Errorf("%s not written: %w", r.path, err))
			continue
		}
		res.Written = append(res.Written, r.path)
	}
	return nil
}

// LoadGrid reads the event grid the command line gives: spec (--grid,
// geo.ParseGrid) or the JSON file (--grid-file, geo.ReadGridJSON), not
// both; nil when neither is given (an automatic grid).
func LoadGrid(spec, file string) (*geo.Grid, error) {
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

// OpenFiles opens the bearing files named on the command line as
// Sources, "-" being stdin; closeAll closes what was opened (also after
// an error, when it is a no-op for the files not opened).
func OpenFiles(names []string, stdin io.Reader) (srcs []Source, closeAll func(), err error) {
	var open []*os.File
	closeAll = func() {
		for _, f := range open {
			f.Close()
		}
	}
	for _, n := range names {
		if n == "-" {
			srcs = append(srcs, Source{Name: "stdin", R: stdin})
			continue
		}
		fh, err := os.Open(n)
		if err != nil {
			return nil, closeAll, fmt.Errorf("read bearings: %w", err)
		}
		open = append(open, fh)
		srcs = append(srcs, Source{Name: n, R: fh})
	}
	return srcs, closeAll, nil
}

// Err is the run's outcome as an error for the exit status: some
// transmitters could not be fixed, or some output files could not be
// made (the rest is still reported); nil when neither.
func (res *Result) Err() error {
	switch {
	case len(res.Refused) > 0:
		return fmt.Errorf("%d of %d transmitters could not be fixed", len(res.Refused), len(res.Refused)+len(res.Fixes))
	case len(res.OutputErrors) > 0:
		return fmt.Errorf("%d output file(s) could not be made: %v", len(res.OutputErrors), res.OutputErrors[0])
	}
	return nil
}
