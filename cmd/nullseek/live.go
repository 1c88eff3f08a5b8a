package main

import (
	"context"
	"fmt"
	"os"
	"strings"
	"time"

	"github.com/spf13/cobra"

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
// into the options, grammars are parsed by package capture.
type liveFlags struct {
	o                                   capture.Options
	sweep, step, gain, latency, compass string
	in                                  *inputFlags
	idf                                 *identFlags
	hf                                  *headingFlags
}

// add lets cmd (bearing, calibrate) take a live receiver in place of
// RECORDING. Call it after the input, ident and heading flags are added.
func (f *liveFlags) add(cmd *cobra.Command, in *inputFlags, idf *identFlags, hf *headingFlags) {
	f.o, f.in, f.idf, f.hf = capture.Defaults(), in, idf, hf
	fl := cmd.Flags()
	fl.StringVar(&f.o.Rotator, "rotator", "", "live: rotctld HOST:PORT that turns the antenna during the capture (needs --sweep or --step)")
	fl.StringVar(&f.sweep, "sweep", "", "live: continuous rotator sweep FROM:TO, rotator azimuths in degrees")
	fl.StringVar(&f.step, "step", "", "live: stepped rotator sweep FROM:STEP:TO:DWELL (degrees, dwell in seconds)")
	fl.Float64Var(&f.o.DurationS, "duration", f.o.DurationS, "live: stop the capture after this many seconds (required without --rotator)")
	fl.Float64Var(&f.o.MarginS, "margin", f.o.MarginS, "live: keep recording this many seconds after the sweep ends")
	fl.StringVar(&f.o.Record, "record", "", "live: keep the capture as FILE.sigmf-meta/.sigmf-data and its heading log FILE.csv, to re-run offline")
	fl.StringVar(&f.gain, "gain", f.o.Gain.String(), "live: tuner gain in dB, or auto")
	fl.IntVar(&f.o.PPM, "ppm", f.o.PPM, "live: receiver frequency correction, parts per million")
	fl.StringVar(&f.latency, "iq-latency", "", "live: `seconds` the samples take to arrive, taken off the capture start so headings and levels line up (default: measured from the stream, from the earliest arrival less the samples received)")
	fl.Float64Var(&f.o.PollHz, "poll-hz", f.o.PollHz, "live: rotator position polls per second")
	fl.StringVar(&f.compass, "nmea-feed", "", "live: NMEA 0183 compass (HDT, HDG, HDM) giving the headings during the capture: tcp://HOST:PORT, udp://[HOST]:PORT or serial:/dev/ttyXXX[@BAUD] (default 4800 baud); needs --duration")
	cmd.Use = strings.Replace(cmd.Use, "RECORDING", "RECORDING|rtl_tcp://HOST:PORT", 1)
	cmd.Long += "\n\n" + capture.Help
}

// run is the command's RunE: body on a recording, or a live capture first
// when RECORDING names a receiver.
func (f *liveFlags) run(body func(*cobra.Command, recording) error) func(*cobra.Command, []string) error {
	return func(c *cobra.Command, args []string) error {
		if !capture.IsReceiver(args[0]) {
			var given []string // the flags only a live receiver takes
			for _, n := range []string{"rotator", "sweep", "step", "duration", "margin", "record", "gain", "ppm", "iq-latency", "poll-hz", "nmea-feed"} {
				if c.Flags().Changed(n) {
					given = append(given, "--"+n)
				}
			}
			if len(given) > 0 {
				return fmt.Errorf("%s: only for a live receiver (rtl_tcp://HOST:PORT), not a recording", strings.Join(given, ", "))
			}
			return body(c, recording{path: args[0]})
		}
		return f.live(c, args[0], body)
	}
}

// options reads the flags into capture options and checks them, and the
// offline body's own flags, before anything is connected.
func (f *liveFlags) options(target string) (capture.Options, error) {
	o, in, hf := f.o, f.in, f.hf
	if in.Format != "" || in.Start != "" {
		return o, fmt.Errorf("--format and --start describe a raw recording; a live receiver gives cu8 and its own start time")
	}
	if err := o.Parse(capture.Flags{Target: target, Rate: in.Rate, Center: in.Center, Freq: in.Freq,
		Sweep: f.sweep, Step: f.step, Gain: f.gain, Latency: f.latency, Compass: f.compass}); err != nil {
		return o, err
	}
	hs, err := hf.source(nil)
	if err != nil {
		return o, err
	}
	o.Ref, o.Turn = hs.Ref, hs.Turn
	if hs.LogPath != "" && hs.NMEAPath != "" {
		return o, fmt.Errorf("give one heading file: --headings or --nmea")
	}
	switch {
	case hs.Turn != nil:
	case hs.LogPath != "":
		o.HeadingFile = "--headings"
	case hs.NMEAPath != "":
		o.HeadingFile = "--nmea"
	}
	if err := o.Validate(); err != nil {
		return o, err
	}
	if _, _, err := in.config(); err != nil {
		return o, err
	}
	if _, err := f.idf.options(); err != nil {
		return o, err
	}
	if _, err := hs.Pattern(); err != nil {
		return o, err
	}
	if o.Ref == heading.Magnetic && o.HeadingFile == "" {
		// The body converts with the recording's start time; this only
		// checks now that it will be able to.
		if _, err := hs.DeclinationAt(time.Now().UTC(), nil); err != nil {
			return o, err
		}
	}
	return o, nil
}

// live captures from the receiver at target, then runs body on the
// recording (capture.Analyse).
func (f *liveFlags) live(c *cobra.Command, target string, body func(*cobra.Command, recording) error) error {
	o, err := f.options(target)
	if err != nil {
		return err
	}
	o.Notes = func(s string) { fmt.Fprintln(c.ErrOrStderr(), s) }
	if w, ok := c.ErrOrStderr().(*os.File); ok {
		o.Status = capture.NewStatusLine(w)
	}
	return capture.Analyse(c.Context(), o, "nullseek "+c.Name(), func(ctx context.Context, meta string, track *heading.Track) error {
		c.SetContext(ctx)
		return body(c, recording{path: meta, track: track})
	})
}
