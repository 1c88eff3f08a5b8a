package main

import (
	"errors"

	"github.com/spf13/cobra"

	"nullseek/logbook"
)

func newQueryCmd() *cobra.Command {
	root := &cobra.Command{Use: "query bearings|schedule", Short: "Read a station database: bearings of a time window, the schedule as it stood at a time",
		RunE: func(*cobra.Command, []string) error {
			return errors.New("query: say what to read: bearings or schedule")
		}}
	var bq, sq logbook.QueryFlags
	var bf, sf logbook.Flags
	bearings := &cobra.Command{Use: "bearings --db FILE [--from T] [--to T] [--station-name S] [--ident ID]", Args: cobra.NoArgs,
		Short: "The stored bearings of a time window, per station and transmitter",
		RunE:  func(c *cobra.Command, _ []string) error { return bq.ShowBearings(c.OutOrStdout(), bf.DB) }}
	sched := &cobra.Command{Use: "schedule --db FILE [--at T]", Short: "The slot schedule stored as it stood at a time", Args: cobra.NoArgs,
		RunE: func(c *cobra.Command, _ []string) error { return sq.ShowSchedule(c.OutOrStdout(), sf.DB) }}
	bq.Add(bearings.Flags())
	sq.AddAt(sched.Flags())
	bearings.Flags().BoolVar(&bq.JSON, "json", false, `one JSON object per line (with its "type") instead of a table`)
	sched.Flags().BoolVar(&sq.JSON, "json", false, `one JSON object per line (with its "type") instead of a table`)
	stationFile(bearings, &bf, "db")
	stationFile(sched, &sf, "db")
	root.AddCommand(bearings, sched)
	return root
}
