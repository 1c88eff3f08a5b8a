package main

import (
	"context"
	"fmt"
	"strings"
	"time"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"nullseek/capture"
	"nullseek/heading"
)

// recording is what a command's body analyses: a file, and the heading
// track a live capture recorded with it (nil: the heading flags say).
type recording struct {
	path  string
	track *heading.Track
}

// liveFlags are the flags of a live capture; numeric ones go straight
// into the options, grammars (f) are parsed by package capture.
type liveFlags struct {
	o    capture.Options
	f    capture.Flags
	only *pflag.FlagSet // the flags only a live receiver takes
	in   *inputFlags
	idf  *identFlags
	hf   *headingFlags
}

// add lets cmd (bearing, calibrate) take a live receiver in place of
// RECORDING. Call it after the input, ident and heading flags are added.
func (f *liveFlags) add(cmd *cobra.Command, in *inputFlags, idf *identFlags, hf *headingFlags) {
	f.o, f.in, f.idf, f.hf = capture.Defaults(), in, idf, hf
	f.only = capture.NewFlagSet(&f.o, &f.f)
	cmd.Flags().AddFlagSet(f.only)
	cmd.Use = strings.Replace(cmd.Use, "RECORDING", "RECORDING|rtl_tcp://HOST:PORT", 1)
	cmd.Long += "\n\n" + capture.Help
}

// run is the command's RunE: body on a recording, or a live capture first
// when RECORDING names a receiver.
func (f *liveFlags) run(body func(*cobra.Command, recording) error) func(*cobra.Command, []string) error {
	return func(c *cobra.Command, args []string) error {
		if capture.IsReceiver(args[0]) {
			return f.live(c, args[0], body)
		}
		if err := capture.OfflineCheck(f.only); err != nil {
			return err
		}
		return body(c, recording{path: args[0]})
	}
}

// options reads the flags into capture options and checks them, and the
// offline body's own flags, before anything is connected.
func (f *liveFlags) options(target string) (capture.Options, error) {
	o, in := f.o, f.in
	if in.Format != "" || in.Start != "" {
		return o, fmt.Errorf("--format and --start describe a raw recording; a live receiver gives cu8 and its own start time")
	}
	fl := f.f
	fl.Target, fl.Rate, fl.Center, fl.Freq = target, in.Rate, in.Center, in.Freq
	if err := o.Parse(fl); err != nil {
		return o, err
	}
	hs, err := f.hf.source(nil)
	if err == nil {
		err = o.SetHeadings(hs.Ref, hs.Turn, hs.LogPath, hs.NMEAPath)
		o.SetStation(hs.HasStation, hs.StationLat, hs.StationLon)
	}
	if err == nil {
		err = o.Validate()
	}
	if err == nil {
		_, _, err = in.config()
	}
	if err == nil {
		_, err = f.idf.options()
	}
	if err == nil {
		_, err = hs.Pattern()
	}
	if err == nil && o.Ref == heading.Magnetic && o.HeadingFile == "" {
		// The body converts with the recording's start time; this only
		// checks now that it will be able to.
		_, err = hs.DeclinationAt(time.Now().UTC(), nil)
	}
	return o, err
}

// live captures from the receiver at target, then runs body on the
// recording (capture.Analyse).
func (f *liveFlags) live(c *cobra.Command, target string, body func(*cobra.Command, recording) error) error {
	o, err := f.options(target)
	if err != nil {
		return err
	}
	o.Notes = func(s string) { fmt.Fprintln(c.ErrOrStderr(), s) }
	o.Status = capture.NewStatus(c.ErrOrStderr())
	return capture.Analyse(c.Context(), o, "nullseek "+c.Name(), func(ctx context.Context, meta string, track *heading.Track) error {
		c.SetContext(ctx)
		return body(c, recording{path: meta, track: track})
	})
}
