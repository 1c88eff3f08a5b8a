package main

import (
	"context"
	"fmt"
	"strings"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"nullseek/capture"
	"nullseek/heading"
	"nullseek/survey"
)

// liveFlags are the flags of a live capture; numeric ones go straight
// into the options, grammars (f) are parsed by package capture.
type liveFlags struct {
	o    capture.Options
	f    capture.Flags
	only *pflag.FlagSet // the flags only a live receiver takes
	job  *survey.Job
}

// add lets cmd (bearing, calibrate) take a live receiver in place of
// RECORDING. Call it after the job's flags are added.
func (f *liveFlags) add(cmd *cobra.Command, job *survey.Job) {
	f.o, f.job = capture.Defaults(), job
	f.only = capture.NewFlagSet(&f.o, &f.f)
	cmd.Flags().AddFlagSet(f.only)
	cmd.Use = strings.Replace(cmd.Use, "RECORDING", "RECORDING|rtl_tcp://HOST:PORT", 1)
	cmd.Long += "\n\n" + capture.Help
}

// run is the command's RunE: body on the job's recording, after a live
// capture (capture.Analyse) when RECORDING names a receiver.
func (f *liveFlags) run(body func(*cobra.Command) error) func(*cobra.Command, []string) error {
	return func(c *cobra.Command, args []string) error {
		if !capture.IsReceiver(args[0]) {
			if err := capture.OfflineCheck(f.only); err != nil {
				return err
			}
			f.job.Path = args[0]
			return body(c)
		}
		o, err := f.job.LiveOptions(args[0], f.o, f.f, c.ErrOrStderr())
		if err != nil {
			return err
		}
		o.Notes = func(s string) { fmt.Fprintln(c.ErrOrStderr(), s) }
		o.Status = capture.NewStatus(c.ErrOrStderr())
		return capture.Analyse(c.Context(), o, "nullseek "+c.Name(), func(ctx context.Context, meta string, track *heading.Track) error {
			c.SetContext(ctx)
			f.job.Path, f.job.Track = meta, track
			return body(c)
		})
	}
}
