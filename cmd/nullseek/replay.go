package main

import (
	"os"
	"os/signal"
	"syscall"

	"github.com/spf13/cobra"

	"nullseek/internal/warnlog"
	"nullseek/sdr"
)

func newReplayCmd() *cobra.Command {
	o := sdr.DefaultReplayRequest()
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
			o.Path, o.Logger = args[0], warnlog.NewProgress(cmd.ErrOrStderr(), "nullseek")
			return sdr.Replay(ctx, o)
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.Listen, "listen", o.Listen, "serve on `HOST:PORT` (loopback unless --allow-remote)")
	f.BoolVar(&o.AllowRemote, "allow-remote", o.AllowRemote, "allow a --listen address other clients on the network can reach")
	f.Float64Var(&o.Speed, "speed", o.Speed, "pace: 1 real time, 2 twice as fast, 0 as fast as the client reads")
	f.BoolVar(&o.Loop, "loop", o.Loop, "start the recording again at its end, until stopped")
	f.StringVar(&o.Raw.Rate, "rate", "", "sample rate of a raw recording, S/s (k/M suffixes allowed)")
	f.StringVar(&o.Raw.Format, "format", "", "sample format of a raw recording: cu8, ci8, ci16_le, cf32_le")
	f.StringVar(&o.Raw.Center, "center", "", "centre frequency of a raw recording, Hz (k/M/G suffixes allowed)")
	f.StringVar(&o.Raw.Start, "start", "", "UTC time of a raw recording's first sample (RFC 3339)")
	return cmd
}
