package logbook

import (
	"fmt"
	"io"
	"slices"

	"github.com/spf13/pflag"

	"nullseek/ident/schedule"
	"nullseek/locate"
	"nullseek/station"
	"nullseek/store"
)

// Flags are the --station-file and --db flags the commands share. The
// station file's values (station.File.Settings) fill the command's flags
// the user did not give, so a flag given explicitly wins; --db (default:
// the station file's database) takes what a command given inputs found,
// and is read by one given none.
type Flags struct {
	StationFile, DB string
	// File is the station file read by Apply; nil without one.
	File *station.File
	fs   *pflag.FlagSet
	only []string
}

// alternatives are the flags that give the same thing as a station file's
// setting another way: given one of them, the setting is left out.
var alternatives = map[string][]string{"headings": {"turn", "nmea", "nmea-feed", "rotator"}, "freq": {"offset"}}

// Add adds the flags to fs; only, when given, limits the station file's
// values to those flags.
func (f *Flags) Add(fs *pflag.FlagSet, only ...string) {
	f.fs, f.only = fs, only
	fs.StringVar(&f.StationFile, "station-file", "", "station file (TOML): its values fill the flags not given (channel, IDs, position, antenna, mount offset, heading, database)")
	fs.StringVar(&f.DB, "db", "", "SQLite station database: a run on inputs stores what it found (a re-run updates, never duplicates), a run without reads it; default: the station file's")
}

// Apply reads the station file and fills the flags not given from it;
// with inputs (a command that will write) it opens --db once, so that a
// bad database is found before a long scan. Call it after the flags are
// parsed, before the command's work.
func (f *Flags) Apply(inputs int) error {
	if f.StationFile != "" {
		var err error
		if f.File, err = station.Load(f.StationFile); err != nil {
			return err
		}
		for _, s := range f.File.Settings() {
			if slices.ContainsFunc(alternatives[s.Flag], f.fs.Changed) {
				continue // the user chose another source of the same thing
			}
			if fl := f.fs.Lookup(s.Flag); fl != nil && !fl.Changed && (f.only == nil || slices.Contains(f.only, s.Flag)) {
				if err := f.fs.Set(s.Flag, s.Value); err != nil {
					return fmt.Errorf("--station-file %s: --%s %s: %w", f.StationFile, s.Flag, s.Value, err)
				}
			}
		}
	}
	if f.DB != "" && inputs > 0 {
		return Check(f.DB)
	}
	return nil
}

// Name is the station file's station name, "" without one.
func (f *Flags) Name() string {
	if f.File == nil {
		return ""
	}
	return f.File.Name
}

// Station is the run's station (StationOf with the station file).
func (f *Flags) Station(hasPos bool, lat, lon float64, antenna string, mountOffsetDeg float64) Station {
	return StationOf(f.File, hasPos, lat, lon, antenna, mountOffsetDeg)
}

// Save stores rec in --db (nothing without it), with the station file's
// station unless rec names one, and says on notes what it stored.
func (f *Flags) Save(notes io.Writer, rec Recording) error {
	if f.DB == "" {
		return nil
	}
	if rec.Station.Name == "" {
		rec.Station = f.Station(false, 0, 0, "", 0)
	}
	sv, err := Save(f.DB, rec)
	return report(notes, sv, err)
}

// SaveFixes stores the fixes of res in --db (nothing without it), each
// under the window of the bearings q read from the database (FixSources).
func (f *Flags) SaveFixes(notes io.Writer, res *locate.Result, q *QueryFlags) error {
	if f.DB == "" {
		return nil
	}
	sv, err := SaveFixes(f.DB, res, q.spans)
	return report(notes, sv, err)
}

func report(w io.Writer, sv *Saved, err error) error {
	if err != nil {
		return err
	}
	for _, n := range append(sv.Notes, sv.String()) {
		if _, err := fmt.Fprintln(w, "nullseek: "+n); err != nil {
			return err
		}
	}
	return nil
}

// QueryFlags select what is read back from a database, and how it is
// printed.
type QueryFlags struct {
	from, to, station, ident, at string
	JSON                         bool
	spans                        map[string]store.Window // of the bearings FixSources read
}

// Add adds --from, --to, --station-name and --ident to fs.
func (q *QueryFlags) Add(fs *pflag.FlagSet) {
	fs.StringVar(&q.from, "from", "", "from the database: from this UTC time (RFC 3339, e.g. 2026-05-01T08:00:00Z)")
	fs.StringVar(&q.to, "to", "", "from the database: up to this UTC time (RFC 3339)")
	fs.StringVar(&q.station, "station-name", "", "from the database: only this station's")
	fs.StringVar(&q.ident, "ident", "", "from the database: only this transmitter's")
}

// AddAt adds --at (the time a schedule stood at) and --json to fs.
func (q *QueryFlags) AddAt(fs *pflag.FlagSet) {
	fs.StringVar(&q.at, "at", "", "the UTC time (RFC 3339) the schedule stood at (default: now)")
}

// Query is what the flags select.
func (q *QueryFlags) Query() (out Query, err error) {
	out.Station, out.Ident = q.station, q.ident
	if out.From, err = ParseTime("from", q.from); err == nil {
		out.To, err = ParseTime("to", q.to)
	}
	return out, err
}

// Plan is the slot schedule of the bursts stored in db that the flags
// select (Plan).
func (q *QueryFlags) Plan(db string, opts schedule.Options) (*schedule.Plan, error) {
	sel, err := q.Query()
	if err != nil {
		return nil, err
	}
	return Plan(db, sel, opts)
}

// FixSources are the bearings inputs of a fix: the files already opened
// (srcs, err from locate.OpenFiles) or, when none were named, the
// bearings stored in db that the flags select.
func (q *QueryFlags) FixSources(db string, srcs []locate.Source, err error) ([]locate.Source, error) {
	if err != nil || len(srcs) > 0 {
		return srcs, err
	}
	if db == "" {
		return nil, fmt.Errorf("nothing to fix: give bearings files (CSV or JSON, - for stdin) or --db FILE")
	}
	sel, err := q.Query()
	if err != nil {
		return nil, err
	}
	src, spans, err := FixSource(db, sel)
	q.spans = spans
	return []locate.Source{src}, err
}

// ShowBearings prints the stored bearings the flags select.
func (q *QueryFlags) ShowBearings(w io.Writer, db string) error {
	sel, err := q.Query()
	if err != nil {
		return err
	}
	return ShowBearings(w, db, sel, q.JSON)
}

// ShowSchedule prints the schedule stored as it stood at --at.
func (q *QueryFlags) ShowSchedule(w io.Writer, db string) error {
	at, err := ParseTime("at", q.at)
	if err != nil {
		return err
	}
	return ShowSchedule(w, db, at, q.JSON)
}
