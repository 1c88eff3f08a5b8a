package watch

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"time"

	"nullseek/capture"
	"nullseek/station"
	"nullseek/store"
)

// Short and Help are the watch command's one-line and long help.
const (
	Short = "Run a fixed or moving bearing station unattended, logging bursts, identifiers and bearings to SQLite"
	Help  = `Runs the station a station file describes until interrupted (SIGINT or SIGTERM) or for --duration:
the receiver streams, each burst is identified and its bearing fitted against the antenna's heading (a rotator
swept back and forth between the file's limits, or an NMEA compass), and bursts, level readings, headings,
bearings and the slot schedule go into the station's SQLite database, committed at least once a second.
A moving station (position.source gpsd, or nmea over tcp://) stamps each bearing with where it was at the
middle of its burst; while its position source has no fix within 5 s, bearings are stored without a position.
One line per burst goes to standard output, a status line every 10 s to standard error (input level, the
channel's level and SNR while a burst is on, the heading, the position). A heading source that fails does not stop the
watch: bursts are logged without bearings until it answers again. --record DIR keeps every sample received as
SigMF pairs (cu8, core:geolocation) in DIR, a new pair every --record-every. A full or write-protected
database stops the watch with one error; what was committed stays.`
)

// FileOptions are the watch command's options: a station file and what
// may override it.
type FileOptions struct {
	// StationFile is the station file to run (required); DB overrides its
	// database.
	StationFile, DB string
	// Duration stops the watch after this much of the stream (0: until
	// interrupted).
	Duration time.Duration
	// RecordDir and RecordEvery: see Options.
	RecordDir   string
	RecordEvery time.Duration
}

// Validate checks the options before anything is opened.
func (o FileOptions) Validate() error {
	switch {
	case o.StationFile == "":
		return errors.New("--station-file: give the station file to run")
	case o.Duration < 0 || o.Duration.Seconds() > capture.MaxDurationS:
		return fmt.Errorf("--duration %v: want 0 (until interrupted) to %v", o.Duration, time.Duration(capture.MaxDurationS)*time.Second)
	case o.RecordEvery < 0 || (o.RecordEvery > 0 && o.RecordEvery < time.Second):
		return fmt.Errorf("--record-every %v: want at least 1s", o.RecordEvery)
	}
	if o.RecordDir != "" {
		if fi, err := os.Stat(o.RecordDir); err != nil || !fi.IsDir() {
			return fmt.Errorf("--record %s: not a directory; create it first", o.RecordDir)
		}
	}
	return nil
}

// RunFile loads the station file, opens its database and watches until
// ctx ends, SIGINT or SIGTERM arrives or the duration is reached: burst
// lines to stdout, warnings and status lines to stderr.
func RunFile(ctx context.Context, o FileOptions, stdout, stderr io.Writer) error {
	if err := o.Validate(); err != nil {
		return err
	}
	st, err := station.Load(o.StationFile)
	if err != nil {
		return err
	}
	path := o.DB
	if path == "" {
		path = st.Database
	}
	if path == "" {
		return fmt.Errorf("--db: %s names no database; give --db FILE", o.StationFile)
	}
	db, err := store.Open(path, store.Options{})
	if err != nil {
		return fmt.Errorf("--db %s: %w", path, err)
	}
	defer db.Close()
	if ctx == nil {
		ctx = context.Background()
	}
	ctx, stop := capture.NotifySignals(ctx)
	defer stop()
	_, err = Run(ctx, Options{Station: st, DB: db, Log: stdout, Status: stderr, DurationS: o.Duration.Seconds(),
		RecordDir: o.RecordDir, RecordEvery: o.RecordEvery})
	return err
}
