package main

import (
	"github.com/spf13/cobra"

	"nullseek/capture"
	"nullseek/watch"
)

func newWatchCmd() *cobra.Command {
	var o watch.FileOptions
	cmd := &cobra.Command{Use: "watch --station-file FILE [--db FILE] [--duration D] [--record DIR]", Short: watch.Short, Long: watch.Help,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			if err := o.Validate(); err != nil {
				return err
			}
			return watch.RunFile(cmd.Context(), o, cmd.OutOrStdout(), cmd.ErrOrStderr())
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.StationFile, "station-file", "", "the station file (TOML) to run (required)")
	f.StringVar(&o.DB, "db", "", "the SQLite database to log to (default: the station file's database)")
	f.DurationVar(&o.Duration, "duration", 0, "stop after this much of the stream (e.g. 90s, 8h); default: until interrupted")
	f.StringVar(&o.RecordDir, "record", "", "keep every sample received as SigMF pairs in this (existing) directory")
	f.DurationVar(&o.RecordEvery, "record-every", capture.DefaultRecordEvery, "--record: start a new SigMF pair after this much receiver time")
	return cmd
}
