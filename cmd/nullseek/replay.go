package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"os/signal"
	"syscall"

	"github.com/spf13/cobra"

	"nullseek/internal/warnlog"
	"nullseek/sdr"
	"nullseek/survey"
)

// replayOptions are the replay command's flags.
type replayOptions struct {
	listen      string
	allowRemote bool
	speed       float64
	loop        bool
	// in describes a raw recording, as for the other commands
	// (survey.InputFlags.Raw parses it).
	in survey.InputFlags
}

func newReplayCmd() *cobra.Command {
	var o replayOptions
	cmd := &cobra.Command{
		Use:   "replay RECORDING",
		Short: "Serve a recording over rtl_tcp, as if it were a live receiver",
		Long: `Serves RECORDING (SigMF, .sigmf archive, WAV IQ or raw IQ with --rate and --format)
with the rtl_tcp protocol, so any rtl_tcp client, nullseek's live forms included, can be
tried on it. One client at a time; a client that reconnects continues where the stream
stopped. --speed 1 is real time, 2 twice as fast, 0 as fast as the client reads.
A client's set-sample-rate and set-frequency commands must match the recording (a replay
cannot resample or retune): a mismatch closes that client's connection and the reason is
printed. Gain and other settings are accepted and change nothing.
It listens on loopback only unless --allow-remote is given (rtl_tcp has no authentication).
The command ends at the end of the recording (without --loop) or on Ctrl-C.`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			ctx, stop := signal.NotifyContext(cmd.Context(), os.Interrupt, syscall.SIGTERM)
			defer stop()
			return runReplay(ctx, cmd.ErrOrStderr(), args[0], o)
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.listen, "listen", sdr.DefaultReplayAddr, "serve on `HOST:PORT` (loopback unless --allow-remote)")
	f.BoolVar(&o.allowRemote, "allow-remote", false, "allow a --listen address other clients on the network can reach")
	f.Float64Var(&o.speed, "speed", 1, "pace: 1 real time, 2 twice as fast, 0 as fast as the client reads")
	f.BoolVar(&o.loop, "loop", false, "start the recording again at its end, until stopped")
	f.StringVar(&o.in.Rate, "rate", "", "sample rate of a raw recording, S/s (k/M suffixes allowed)")
	f.StringVar(&o.in.Format, "format", "", "sample format of a raw recording: cu8, ci8, ci16_le, cf32_le")
	f.StringVar(&o.in.Center, "center", "", "centre frequency of a raw recording, Hz (k/M/G suffixes allowed)")
	f.StringVar(&o.in.Start, "start", "", "UTC time of a raw recording's first sample (RFC 3339)")
	return cmd
}

// runReplay serves path until it ends, ctx is cancelled or it fails;
// progress and refused commands go to errOut.
func runReplay(ctx context.Context, errOut io.Writer, path string, o replayOptions) error {
	if math.IsNaN(o.speed) || math.IsInf(o.speed, 0) || o.speed < 0 {
		return fmt.Errorf("--speed %v: give 0 (as fast as the client reads) or a positive factor (1 = real time)", o.speed)
	}
	raw, err := o.in.Raw()
	if err != nil {
		return err
	}
	open := func() (sdr.Source, error) { return sdr.Open(path, raw) }
	src, err := open() // checked before listening: a bad file is one line, no server
	if err != nil {
		return err
	}
	info := src.Info()
	src.Close()
	ln, err := sdr.ListenReplay(o.listen, o.allowRemote)
	if err != nil {
		if errors.Is(err, sdr.ErrNotLoopback) {
			return fmt.Errorf("--listen: %w with --allow-remote", err)
		}
		return fmt.Errorf("--listen: %w", err)
	}
	pace := "as fast as the client reads"
	if o.speed > 0 {
		pace = fmt.Sprintf("%g× real time", o.speed)
	}
	centre := "unknown centre"
	if info.CenterHz > 0 {
		centre = fmt.Sprintf("centre %.0f Hz", info.CenterHz)
	}
	if o.loop {
		pace += ", looping"
	}
	fmt.Fprintf(errOut, "nullseek: replaying %s (%.0f S/s %s, %s) on rtl_tcp %s, %s\n",
		path, info.SampleRate, info.Format, centre, ln.Addr(), pace)
	log := warnlog.NewProgress(errOut, "nullseek")
	err = sdr.ServeReplay(ctx, ln, open, sdr.ReplayOptions{Speed: o.speed, Loop: o.loop, Logger: log})
	if errors.Is(err, context.Canceled) {
		fmt.Fprintln(errOut, "nullseek: replay stopped")
		return nil
	}
	return err
}
