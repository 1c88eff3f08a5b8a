package main

import (
	"github.com/spf13/cobra"

	"nullseek/logbook"
	"nullseek/survey"
)

type bearingOptions struct {
	survey.BearingJob
	sf logbook.Flags
	lf liveFlags
}

func newBearingCmd() *cobra.Command {
	var o bearingOptions
	cmd := &cobra.Command{
		Use:   "bearing RECORDING",
		Short: "Fit signal level against antenna heading into a bearing per burst and per transmitter",
		Long: `bearing scans a recording like scan does, joins each burst's level track
with the antenna's heading (a log, NMEA sentences or a steady turn) and fits
the antenna pattern to it: the bearing (true), its 1-sigma, the alternate
bearing when the pattern is ambiguous (a loop's two nulls), the null depth
and the sweep coverage, per burst and combined per transmitter. It refuses
rather than invents a bearing when the sweep cannot support one.`,
		Args: cobra.ExactArgs(1),
		RunE: o.lf.run(func(cmd *cobra.Command) error {
			o.Keep, o.StationName, o.StationAltM = o.sf.Keep(cmd.ErrOrStderr()), o.sf.Name(), o.sf.AltM()
			return o.Run(cmd.Context(), cmd.OutOrStdout(), cmd.ErrOrStderr())
		}),
	}
	addJobFlags(cmd, &o.Job, true)
	cmd.Flags().BoolVar(&o.JSON, "json", false, "one JSON object per burst and per transmitter")
	cmd.Flags().StringVar(&o.Plot, "plot", "", "write a polar plot per transmitter, from its combined bearing: PREFIX.png or PREFIX.svg becomes PREFIX-IDENT.png")
	cmd.Flags().BoolVar(&o.PlotBursts, "plot-bursts", false, "with --plot, also one polar plot per burst (PREFIX-IDENT-burst-N.png)")
	cmd.Flags().StringVar(&o.LOPCSV, "bearings-csv", "", "write the transmitters' bearings as a CSV FILE that nullseek fix reads (needs --station)")
	o.lf.add(cmd, &o.Job) // live receiver, rotator or compass: live.go
	stationFile(cmd, &o.sf)
	return cmd
}
