package main

import (
	"github.com/spf13/cobra"

	"nullseek/logbook"
	"nullseek/survey"
)

// addJobFlags adds the recording, ident and (with headings) heading flags
// of j to cmd; a turning antenna's merge gap is then the default.
func addJobFlags(cmd *cobra.Command, j *survey.Job, headings bool) {
	j.Input.Add(cmd.Flags())
	j.Idents.Add(cmd.Flags())
	if headings {
		j.Headings.Add(cmd.Flags())
		j.Input.Turning()
	}
}

// stationFile adds --station-file and --db (logbook.Flags) to cmd, whose
// RunE then applies the station file first; only as for Flags.Add.
func stationFile(cmd *cobra.Command, f *logbook.Flags, only ...string) {
	f.Add(cmd.Flags(), only...)
	body := cmd.RunE
	cmd.RunE = func(c *cobra.Command, args []string) error {
		if err := f.Apply(len(args)); err != nil {
			return err
		}
		return body(c, args)
	}
}
