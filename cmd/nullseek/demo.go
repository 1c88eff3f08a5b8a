package main

import (
	"fmt"
	"io"

	"github.com/spf13/cobra"

	"nullseek/demo"
	"nullseek/internal/progress"
)

type demoOptions struct {
	outDir  string
	writeIQ bool
	db      string
}

func newDemoCmd() *cobra.Command {
	var o demoOptions
	cmd := &cobra.Command{
		Use:   "demo",
		Short: "Run the whole job on a built-in invented scenario (three beacons, three stations)",
		Long: `demo renders what three receiving stations with turning antennas hear of
three beacons taking turns on one channel (an invented scene; call N0CALL),
then does the whole job on it as it would on real recordings: finds the
bursts, reads the identifiers, works out the slot schedule, fits a bearing
per transmitter at every station and fixes each transmitter's position,
comparing every result with the scene's truth. Files go to --out.`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error { return runDemo(cmd, &o) },
	}
	cmd.Flags().StringVar(&o.outDir, "out", demo.DefaultOutDir, "directory for the demo's files (bearings CSV, map, GeoJSON, polar plots, heading logs)")
	cmd.Flags().BoolVar(&o.writeIQ, "write-iq", false, fmt.Sprintf("also write each station's recording as a SigMF pair, cu8 at %d S/s (a rate rtl_tcp accepts; about 86 MB each)", demo.IQRateHz))
	cmd.Flags().StringVar(&o.db, "db", "", "also store every station's bursts, levels, headings and bearings, the schedule and the fixes in this SQLite database")
	return cmd
}

// runDemo prints the demo's report; its progress lines go to stderr when
// that is a terminal.
func runDemo(cmd *cobra.Command, o *demoOptions) error {
	var prog io.Writer = io.Discard
	if tty := progress.Terminal(cmd.ErrOrStderr()); tty != nil {
		prog = tty
	}
	return demo.Run(cmd.Context(), cmd.OutOrStdout(), prog, o.outDir, o.writeIQ, o.db)
}
