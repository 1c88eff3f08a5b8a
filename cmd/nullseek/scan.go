package main

import (
	"github.com/spf13/cobra"

	"nullseek/logbook"
	"nullseek/survey"
)

type scanOptions struct {
	survey.ScanJob
	sf logbook.Flags
}

func newScanCmd() *cobra.Command {
	var o scanOptions
	cmd := &cobra.Command{
		Use:   "scan RECORDING",
		Short: "Find every burst on a channel of an IQ recording, measure it and read its identifier",
		Long: `scan reads an IQ recording (SigMF .sigmf-meta/.sigmf-data or .sigmf archive,
2-channel WAV, or raw IQ with --rate and --format), tunes to one channel and
reports each transmission burst: start and end, carrier offset, level, noise
floor, SNR, clipping, the decoded Morse text, the identifier and the
transmitter it belongs to. Without --freq or --offset it lists the carriers
it sees and scans the strongest.`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			o.Path, o.Keep = args[0], o.sf.Keep(cmd.ErrOrStderr())
			return o.Run(cmd.Context(), cmd.OutOrStdout(), cmd.ErrOrStderr())
		},
	}
	addJobFlags(cmd, &o.Job, false)
	cmd.Flags().BoolVar(&o.JSON, "json", false, "one JSON object per line instead of a table")
	cmd.Flags().BoolVar(&o.List, "list", false, "only list the carriers seen in the recording")
	stationFile(cmd, &o.sf)
	return cmd
}
