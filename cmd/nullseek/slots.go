package main

import (
	"fmt"

	"github.com/spf13/cobra"

	"nullseek/ident/schedule"
	"nullseek/logbook"
	"nullseek/survey"
)

type slotsOptions struct {
	survey.SlotsJob
	sf logbook.Flags
	qf logbook.QueryFlags
}

func newSlotsCmd() *cobra.Command {
	var o slotsOptions
	o.Plan = schedule.DefaultOptions()
	cmd := &cobra.Command{
		Use:   "slots RECORDING | --db FILE",
		Short: "Work out the slot schedule of beacons sharing a channel: order, period, drift, next on, collisions",
		Long: `slots scans a recording like scan does, then fits each transmitter's burst
start times: the cyclic order, on-time, gap to the next, period (least
squares, with its standard error), clock drift in ppm, the predicted next
start times, and when two neighbouring slots will first overlap at the
measured drifts. Overlaps already in the recording are reported too.
Without RECORDING it reads the bursts stored in --db (--from, --to, --station-name).`,
		Args: cobra.MaximumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if len(args) > 0 {
				o.Path = args[0]
			}
			o.PeriodGiven, o.Keep = cmd.Flags().Changed("period"), o.sf.Keep(cmd.ErrOrStderr())
			o.Stored = func(p schedule.Options) (*schedule.Plan, error) { return o.qf.Plan(o.sf.DB, p) }
			return o.Run(cmd.Context(), cmd.OutOrStdout(), cmd.ErrOrStderr())
		},
	}
	addJobFlags(cmd, &o.Job, false)
	cmd.Flags().BoolVar(&o.JSON, "json", false, "print the plan as one JSON object")
	cmd.Flags().Float64Var(&o.Plan.NominalPeriodS, "period", o.Plan.NominalPeriodS, "the programmed cycle in seconds, when known (drift is measured against it; default: the median of the transmitters)")
	cmd.Flags().IntVar(&o.Plan.NextCount, "next", o.Plan.NextCount, fmt.Sprintf("how many next start times to predict per transmitter (0–%d)", schedule.MaxNextCount))
	o.qf.Add(cmd.Flags())
	stationFile(cmd, &o.sf)
	return cmd
}
