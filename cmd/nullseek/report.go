package main

import (
	"github.com/spf13/cobra"

	"nullseek/report"
	"nullseek/report/session"
)

func newReportCmd() *cobra.Command {
	var o session.Options
	cmd := &cobra.Command{
		Use:   "report --out PAGE.html BEARINGS.csv|BEARINGS.json [MORE...]",
		Short: "Write one self-contained HTML page of a session: fixes, map, bearings, stations, slot schedule, polar plots",
		Long: `report gathers a session's results into one HTML page that needs nothing
else to be read or printed (pictures embedded, no script). The bearings files
(the CSV or JSON that fix reads) give the stations and bearings. The fixes are
the lines fix --json printed (--fixes), or are worked out here from the bearings
as fix does (--grid as fix's). The slot schedule is the object slots --json
printed (--slots). --measured says what a station's bearings were measured from;
what no input says is shown as not recorded.`,
		Args: cobra.MinimumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			return session.Run(cmd.OutOrStdout(), args, o)
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.Out, "out", "", "write the page to `FILE` (required)")
	f.StringVar(&o.Title, "title", "", "title of the page (default: "+report.DefaultTitle+")")
	f.StringVar(&o.Fixes, "fixes", "", "the fixes: a `FILE` of the lines nullseek fix --json printed (default: fix the bearings here)")
	f.StringVar(&o.Grid, "grid", "", "event grid for fixes worked out here, as fix --grid (not with --fixes)")
	f.StringVar(&o.Slots, "slots", "", "the slot schedule: a `FILE` holding what nullseek slots --json printed")
	f.StringArrayVar(&o.Maps, "map", nil, "a map picture `FILE` (.png or .svg) to show; repeat for more")
	f.StringArrayVar(&o.Polars, "polar", nil, "polar plot files to show, a `GLOB` such as 'polar-*.png'; repeat for more")
	f.StringArrayVar(&o.Measured, "measured", nil,
		"what a station's bearings were measured from: `station=NAME,recording=FILE,antenna=TEXT,heading=TEXT,bearing-json=FILE` (any after station; bearing-json is what bearing --json printed, for the bursts used; repeat per station)")
	return cmd
}
