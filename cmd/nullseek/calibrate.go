package main

import (
	"github.com/spf13/cobra"

	"nullseek/logbook"
	"nullseek/survey"
)

type calibrateOptions struct {
	survey.CalibrateJob
	sf logbook.Flags
	lf liveFlags
}

func newCalibrateCmd() *cobra.Command {
	var o calibrateOptions
	cmd := &cobra.Command{
		Use:   "calibrate RECORDING",
		Short: "Measure the antenna's real pattern and the heading source's north offset on a transmitter at a known position",
		Long: `calibrate takes a recording (or a live receiver, see --rotator) made while the
antenna turned through a whole circle with a transmitter at a known place,
fits the nominal pattern (--antenna) to line the sweep up, measures the
antenna's real pattern from the same sweep, centres it on its axis of
symmetry (the middle of its main lobe or null) and saves it (--out
pattern.json). The offset printed is how far the heading source's north is
from that axis.

The pattern file carries the total mount offset (the one printed, which
includes any --mount-offset given here) and which direction of the antenna
its heading names; use it in later fits with the same heading flags as
here and no --mount-offset:

  nullseek bearing REC --antenna pattern.json ...

The antenna's reference direction is then the heading source's reading
plus that offset, and the saved pattern is measured relative to it.`,
		Args: cobra.ExactArgs(1),
		RunE: o.lf.run(func(cmd *cobra.Command) error {
			o.Keep = o.sf.Keep(cmd.ErrOrStderr())
			return o.Run(cmd.Context(), cmd.OutOrStdout(), cmd.ErrOrStderr())
		}),
	}
	addJobFlags(cmd, &o.Job, true)
	fl := cmd.Flags()
	fl.StringVar(&o.Tx, "tx", "", "the calibration transmitter's position LAT,LON in degrees (needs --station)")
	fl.StringVar(&o.KnownBearing, "known-bearing", "", "the calibration transmitter's bearing from the station, degrees true (instead of --tx and --station)")
	fl.StringVar(&o.TxIdent, "ident", "", "the calibration transmitter's identifier (or fingerprint label) when several were heard")
	fl.StringVar(&o.Out, "out", "", "write the measured pattern here (JSON; required)")
	fl.BoolVar(&o.JSON, "json", false, "print the result as one JSON object")
	o.lf.add(cmd, &o.Job) // live receiver, rotator or compass: live.go
	stationFile(cmd, &o.sf)
	return cmd
}
