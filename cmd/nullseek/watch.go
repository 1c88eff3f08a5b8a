package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"time"

	"github.com/spf13/cobra"

	"nullseek/capture"
	"nullseek/station"
	"nullseek/store"
	"nullseek/watch"
)

// watchOptions are the watch command's flags.
type watchOptions struct {
	stationFile string
	db          string
	duration    time.Duration
}

func newWatchCmd() *cobra.Command {
	var o watchOptions
	cmd := &cobra.Command{
		Use:   "watch --station-file FILE [--db FILE] [--duration D]",
		Short: "Run a fixed bearing station unattended, logging bursts, identifiers and bearings to SQLite",
		Long: `Runs the station a station file describes until interrupted (SIGINT or SIGTERM) or for --duration:
the receiver streams, each burst is identified and its bearing fitted against the antenna's heading (a rotator
swept back and forth between the file's limits, or an NMEA compass), and bursts, level readings, headings,
bearings and the slot schedule go into the station's SQLite database, committed at least once a second.
One line per burst goes to standard output, a status line every 10 s to standard error. A heading source that
fails does not stop the watch: bursts are logged without bearings until it answers again.`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			return runWatch(cmd.Context(), cmd.OutOrStdout(), cmd.ErrOrStderr(), o)
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.stationFile, "station-file", "", "the station file (TOML) to run (required)")
	f.StringVar(&o.db, "db", "", "the SQLite database to log to (default: the station file's database)")
	f.DurationVar(&o.duration, "duration", 0, "stop after this much of the stream (e.g. 90s, 8h); default: until interrupted")
	return cmd
}

func runWatch(ctx context.Context, stdout, stderr io.Writer, o watchOptions) error {
	if o.stationFile == "" {
		return errors.New("--station-file: give the station file to run")
	}
	if o.duration < 0 || o.duration.Seconds() > capture.MaxDurationS {
		return fmt.Errorf("--duration %v: want 0 (until interrupted) to %v", o.duration, time.Duration(capture.MaxDurationS)*time.Second)
	}
	st, err := station.Load(o.stationFile)
	if err != nil {
		return err
	}
	path := o.db
	if path == "" {
		path = st.Database
	}
	if path == "" {
		return fmt.Errorf("--db: %s names no database; give --db FILE", o.stationFile)
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
	_, err = watch.Run(ctx, watch.Options{Station: st, DB: db, Log: stdout, Status: stderr, DurationS: o.duration.Seconds()})
	return err
}
