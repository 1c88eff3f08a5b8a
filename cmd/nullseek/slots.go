package main

import (
	"encoding/json"
	"fmt"

	"github.com/spf13/cobra"

	"nullseek/ident/schedule"
	"nullseek/logbook"
	"nullseek/survey"
)

type slotsOptions struct {
	in     inputFlags
	idf    identFlags
	sf     logbook.Flags
	qf     logbook.QueryFlags
	asJSON bool
	plan   schedule.Options
}

func newSlotsCmd() *cobra.Command {
	o := slotsOptions{plan: schedule.DefaultOptions()}
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
		RunE: func(cmd *cobra.Command, args []string) error { return runSlots(cmd, args, &o) },
	}
	o.in.add(cmd)
	o.idf.add(cmd)
	cmd.Flags().BoolVar(&o.asJSON, "json", false, "print the plan as one JSON object")
	cmd.Flags().Float64Var(&o.plan.NominalPeriodS, "period", o.plan.NominalPeriodS, "the programmed cycle in seconds, when known (drift is measured against it; default: the median of the transmitters)")
	cmd.Flags().IntVar(&o.plan.NextCount, "next", o.plan.NextCount, fmt.Sprintf("how many next start times to predict per transmitter (0–%d)", schedule.MaxNextCount))
	o.qf.Add(cmd.Flags())
	stationFile(cmd, &o.sf)
	return cmd
}

func runSlots(cmd *cobra.Command, args []string, o *slotsOptions) error {
	if cmd.Flags().Changed("period") {
		if err := zeroFlag("period", o.plan.NominalPeriodS); err != nil {
			return err // 0 would silently mean "unknown"
		}
	}
	if err := o.plan.Validate(); err != nil {
		return err
	}
	plan, err := slotPlan(cmd, args, o)
	if err != nil {
		return err
	}
	if o.asJSON {
		return json.NewEncoder(cmd.OutOrStdout()).Encode(plan)
	}
	return plan.WriteTable(cmd.OutOrStdout())
}

// slotPlan is the slot plan of the recording args names (stored in --db)
// or, without one, of the bursts stored in --db.
func slotPlan(cmd *cobra.Command, args []string, o *slotsOptions) (*schedule.Plan, error) {
	if len(args) == 0 {
		return o.qf.Plan(o.sf.DB, o.plan)
	}
	path := args[0]
	in, err := o.in.input(cmd, path, &o.idf)
	if err != nil {
		return nil, err
	}
	res, err := in.Run(cmd.Context(), nil)
	if err != nil {
		return nil, err
	}
	plan, err := survey.Schedule(res, o.plan)
	if err == nil {
		err = o.sf.Save(cmd.ErrOrStderr(), logbook.Recording{Path: path, Result: res, Plan: plan})
	}
	return plan, err
}
