package logbook

import (
	"io"

	"nullseek/locate"
	"nullseek/survey"
)

// Keep is the survey.Job.Keep that stores what a run found in --db
// (Save; nothing without --db), saying on notes what it stored.
func (f *Flags) Keep(notes io.Writer) func(survey.Kept) error {
	return func(k survey.Kept) error {
		return f.Save(notes, Recording{Path: k.Path, Result: k.Result, Bearings: k.Bearings, Track: k.Track, Plan: k.Plan,
			Station: f.Station(k.HasStation, k.Lat, k.Lon, k.Antenna, k.MountDeg)})
	}
}

// AltM is the station file's height above the WGS84 ellipsoid; nil
// without a station file or a height in it.
func (f *Flags) AltM() *float64 {
	if f.File == nil {
		return nil
	}
	return f.File.Position.AltM
}

// FixJob is the fix command: bearings files (or, with none, the bearings
// stored in --db that Query selects) fixed as Request says, the fixes
// stored in --db.
type FixJob struct {
	Request locate.Request
	Flags   Flags
	Query   QueryFlags
}

// Run fixes the bearings of the files inputs names ("-": stdin) and
// prints the result (locate.Request.Print).
func (j *FixJob) Run(stdin io.Reader, inputs []string, stdout, stderr io.Writer) error {
	o, err := j.Request.Prepare()
	if err != nil {
		return err
	}
	// Bearings from several files (one per station, say) are fixed together.
	srcs, closeAll, err := locate.OpenFiles(inputs, stdin)
	defer closeAll()
	if srcs, err = j.Query.FixSources(j.Flags.DB, srcs, err); err != nil {
		return err
	}
	res, err := locate.Run(srcs, o)
	if err != nil {
		return err
	}
	if err := j.Flags.SaveFixes(stderr, res, &j.Query); err != nil {
		return err
	}
	return j.Request.Print(res, stdout, stderr)
}
