package main

import (
	"context"
	"errors"
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
	fl.StringVar(&f.gain, "gain", "auto", "live: tuner gain in dB, or auto")
	fl.IntVar(&f.o.PPM, "ppm", f.o.PPM, "live: receiver frequency correction, parts per million")
	fl.StringVar(&f.latency, "iq-latency", "", "live: `seconds` the samples take to arrive, taken off the capture start so headings and levels line up (default: measured from the stream, from the earliest arrival less the samples received)")
	fl.Float64Var(&f.o.PollHz, "poll-hz", f.o.PollHz, "live: rotator position polls per second")
	fl.StringVar(&f.compass, "nmea-feed", "", "live: NMEA 0183 compass (HDT, HDG, HDM) giving the headings during the capture: tcp://HOST:PORT, udp://[HOST]:PORT or serial:/dev/ttyXXX[@BAUD] (default 4800 baud); needs --duration")
	cmd.Use = strings.Replace(cmd.Use, "RECORDING", "RECORDING|rtl_tcp://HOST:PORT", 1)
	cmd.Long += `

Live: give rtl_tcp://HOST:PORT (or usb://INDEX in a build with USB) instead
of a recording, with --freq (the channel; the receiver tunes a quarter of
--rate below it unless --center is given), --rate (default 250k) and
--gain. With --rotator HOST:PORT (Hamlib rotctld) and --sweep FROM:TO or
--step FROM:STEP:TO:DWELL the antenna is turned while the receiver records;
the capture ends --margin seconds after the sweep (or at --duration) and is
fitted as usual. Without --rotator give --duration and a heading source
(--turn for a steady hand turn, or --nmea-feed ADDR for a compass that
sends NMEA 0183 headings, stamped as they arrive; --heading-ref picks its
HDT or HDM sentences as for --nmea). --record FILE keeps
FILE.sigmf-meta/.sigmf-data and the heading log FILE.csv. On a terminal a
status line shows the level, the heading and the progress.

Ctrl-C (SIGINT) or SIGTERM stops the rotator, keeps what was captured (with
--record), removes temporary files and exits with 130 or 143. A receiver
that fails mid-capture keeps what it gave, which is analysed when long
enough; the command then exits 1.`
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
	var err error
	if o.Receiver, err = capture.ParseReceiver(target); err != nil {
		return o, err
	}
	if in.format != "" || in.start != "" {
		return o, fmt.Errorf("--format and --start describe a raw recording; a live receiver gives cu8 and its own start time")
	}
	if rate, err := hzFlag("rate", in.rate); err != nil {
		return o, err
	} else if rate != 0 {
		o.RateHz = rate
	}
	if o.CenterHz, err = hzFlag("center", in.center); err != nil {
		return o, err
	}
	if o.FreqHz, err = hzFlag("freq", in.freq); err != nil {
		return o, err
	}
	if o.Plan, err = capture.ParseSweep(f.sweep, f.step); err != nil {
		return o, err
	}
	if o.Gain, err = capture.ParseGain(f.gain); err != nil {
		return o, err
	}
	if o.Latency, err = capture.ParseLatency(f.latency); err != nil {
		return o, err
	}
	if f.compass != "" {
		if o.Compass, err = capture.ParseCompassAddr(f.compass); err != nil {
			return o, err
		}
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
// recording: on a whole capture, or on what a failed receiver gave when it
// is enough. A signal ends either with what was kept.
func (f *liveFlags) live(c *cobra.Command, target string, body func(*cobra.Command, recording) error) error {
	o, err := f.options(target)
	if err != nil {
		return err
	}
	notes := func(s string) { fmt.Fprintln(c.ErrOrStderr(), s) }
	o.Notes = notes
	if w, ok := c.ErrOrStderr().(*os.File); ok {
		o.Status = capture.NewStatusLine(w)
	}
	ctx, stop := capture.NotifySignals(c.Context())
	defer stop()
	res, err := capture.Run(ctx, o)
	if res == nil {
		return err
	}
	defer res.Close()
	for _, w := range res.Warnings {
		notes(w)
	}
	var fault *capture.ReceiverFault
	switch {
	case err == nil:
		notes(recordedNote(c.Name(), res))
	case errors.As(err, &fault) && res.Analysable():
		notes(fmt.Sprintf("the receiver failed %.1f s into the capture: analysing what it gave", res.Seconds()))
	default:
		return err
	}
	c.SetContext(ctx)
	berr := body(c, recording{path: res.Meta, track: res.Track})
	if berr != nil && !res.Kept {
		// The body names its recording; a temporary one is gone by now.
		berr = errors.New(strings.ReplaceAll(berr.Error(), res.Meta, "the live capture"))
	}
	if ctx.Err() != nil {
		return res.InterruptedAnalysis(context.Cause(ctx))
	}
	if err != nil {
		if berr != nil {
			notes(fmt.Sprintf("the %.1f s captured gave no result: %v", res.Seconds(), berr))
		}
		return err
	}
	return berr
}

// recordedNote says what a whole capture recorded and how to re-run it.
func recordedNote(cmdName string, res *capture.Result) string {
	if !res.Kept {
		return fmt.Sprintf("recorded %.1f s", res.Seconds())
	}
	rerun := fmt.Sprintf("nullseek %s %s", cmdName, res.Meta)
	if res.HeadingLog != "" {
		rerun += " --headings " + res.HeadingLog + " (with the same other flags, less the live heading source)"
	} else {
		rerun += " (with the same other flags)"
	}
	return fmt.Sprintf("recorded %.1f s to %s; re-run offline: %s", res.Seconds(), res.Meta, rerun)
}
