package main

import (
	"encoding/json"
	"fmt"
	"os"

	"github.com/spf13/cobra"

	"nullseek/ident/schedule"
	"nullseek/survey"
)

func init() {
	var in inputFlags
	var idf identFlags
	var asJSON bool
	opts := schedule.DefaultOptions()
	cmd := &cobra.Command{
		Use:   "slots RECORDING",
		Short: "Work out the slot schedule of beacons sharing a channel: order, period, drift, next on, collisions",
		Long: `slots scans a recording like scan does, then fits each transmitter's burst
start times: the cyclic order, on-time, gap to the next, period (least
squares, with its standard error), clock drift in ppm, the predicted next
start times, and when two neighbouring slots will first overlap at the
measured drifts. Overlaps already in the recording are reported too.`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if cmd.Flags().Changed("period") {
				if err := zeroFlag("period", opts.NominalPeriodS); err != nil {
					return err // 0 would silently mean "unknown"
				}
			}
			if err := opts.Validate(); err != nil {
				return err
			}
			res, err := surveyRecording(cmd.Context(), args[0], &in, &idf, func(s string) {
				cmd.PrintErrln(s)
			})
			if err != nil {
				return err
			}
			plan, err := survey.Schedule(res, opts)
			if err != nil {
				return err
			}
			if asJSON {
				return json.NewEncoder(os.Stdout).Encode(plan)
			}
			return plan.WriteTable(os.Stdout)
		},
	}
	in.add(cmd)
	idf.add(cmd)
	cmd.Flags().BoolVar(&asJSON, "json", false, "print the plan as one JSON object")
	cmd.Flags().Float64Var(&opts.NominalPeriodS, "period", opts.NominalPeriodS, "the programmed cycle in seconds, when known (drift is measured against it; default: the median of the transmitters)")
	cmd.Flags().IntVar(&opts.NextCount, "next", opts.NextCount, fmt.Sprintf("how many next start times to predict per transmitter (0–%d)", schedule.MaxNextCount))
	rootCmd.AddCommand(cmd)
}
