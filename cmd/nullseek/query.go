package main

import (
	"github.com/spf13/cobra"

	"nullseek/logbook"
)

type queryOptions struct {
	sf     stationFlags
	qf     queryFlags
	at     string
	asJSON bool
}

func newQueryCmd() *cobra.Command {
	root := &cobra.Command{Use: "query", Short: "Read a station database: bearings of a time window, the schedule as it stood at a time"}
	var b, s queryOptions
	bearings := &cobra.Command{Use: "bearings --db FILE [--from T] [--to T] [--station-name S] [--ident ID]",
		Short: "The stored bearings of a time window, per station and transmitter", Args: cobra.NoArgs,
		RunE: func(c *cobra.Command, _ []string) error {
			q, err := b.qf.query()
			if err != nil {
				return err
			}
			return logbook.ShowBearings(c.OutOrStdout(), b.sf.db, q, b.asJSON)
		}}
	sched := &cobra.Command{Use: "schedule --db FILE [--at T]", Short: "The slot schedule stored as it stood at a time", Args: cobra.NoArgs,
		RunE: func(c *cobra.Command, _ []string) error {
			at, err := logbook.ParseTime("at", s.at)
			if err != nil {
				return err
			}
			return logbook.ShowSchedule(c.OutOrStdout(), s.sf.db, at, s.asJSON)
		}}
	b.qf.add(bearings)
	sched.Flags().StringVar(&s.at, "at", "", "the UTC time (RFC 3339) the schedule stood at (default: now)")
	for _, o := range []struct {
		c *cobra.Command
		o *queryOptions
	}{{bearings, &b}, {sched, &s}} {
		o.c.Flags().BoolVar(&o.o.asJSON, "json", false, `one JSON object per line (with its "type") instead of a table`)
		o.o.sf.add(o.c, "db")
		root.AddCommand(o.c)
	}
	return root
}
