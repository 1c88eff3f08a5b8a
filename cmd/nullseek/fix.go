package main

import (
	"github.com/spf13/cobra"

	"nullseek/logbook"
)

func newFixCmd() *cobra.Command {
	var j logbook.FixJob
	cmd := &cobra.Command{
		Use:   "fix BEARINGS.csv|BEARINGS.json|- [MORE...] | --db FILE",
		Short: "Locate transmitters from bearings taken at two or more stations",
		Long: `Reads bearings (CSV with header ident,station,lat,lon,bearing_deg,sigma_deg,reference[,time][,declination_deg][,ambiguous],
or the same keys as JSON) and prints, per ident, the most likely position, its error ellipse (semi-axes and full axes),
the Maidenhead locator, the event-grid cell and the most probable cells. Each transmitter is fixed on its own. Magnetic
bearings are turned to true with WMM2025 at the station and time unless a declination is given; the declinations used
are printed. Rows that repeat an earlier row exactly are reported and counted once. Without --grid or --grid-file an
automatic north-up grid, anchored on round coordinates, covers each cluster of nearby transmitters.
Exit status is 1 for bad input (nothing is written), and also when a transmitter could not be fixed or an output file
could not be made (the others are still printed and written).
With --db the fixes are stored there; without bearings files the bearings stored in --db are fixed (--from, --to,
--station-name, --ident select them).`,
		Args: cobra.ArbitraryArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			return j.Run(cmd.InOrStdin(), args, cmd.OutOrStdout(), cmd.ErrOrStderr())
		},
	}
	j.Request.Add(cmd.Flags())
	j.Query.Add(cmd.Flags())
	stationFile(cmd, &j.Flags, "db")
	return cmd
}
