package main

import (
	"encoding/json"
	"fmt"

	"github.com/spf13/cobra"

	"nullseek/bearing"
	"nullseek/internal/angle"
	"nullseek/logbook"
	"nullseek/survey"
)

type calibrateOptions struct {
	in                           inputFlags
	idf                          identFlags
	hf                           headingFlags
	sf                           logbook.Flags
	lf                           liveFlags
	tx, knownBearing, ident, out string
	asJSON                       bool
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
		RunE: o.lf.run(func(cmd *cobra.Command, rec recording) error { return runCalibrate(cmd, rec, &o) }),
	}
	o.in.add(cmd)
	o.idf.add(cmd)
	o.hf.add(cmd)
	o.in.turning()
	fl := cmd.Flags()
	fl.StringVar(&o.tx, "tx", "", "the calibration transmitter's position LAT,LON in degrees (needs --station)")
	fl.StringVar(&o.knownBearing, "known-bearing", "", "the calibration transmitter's bearing from the station, degrees true (instead of --tx and --station)")
	fl.StringVar(&o.ident, "ident", "", "the calibration transmitter's identifier (or fingerprint label) when several were heard")
	fl.StringVar(&o.out, "out", "", "write the measured pattern here (JSON; required)")
	fl.BoolVar(&o.asJSON, "json", false, "print the result as one JSON object")
	o.lf.add(cmd, &o.in, &o.idf, &o.hf) // live receiver, rotator or compass: live.go
	stationFile(cmd, &o.sf)
	return cmd
}

func runCalibrate(cmd *cobra.Command, rec recording, o *calibrateOptions) error {
	hs, err := o.hf.source(rec.track)
	if err != nil {
		return err
	}
	known, how, err := survey.KnownBearing{Bearing: o.knownBearing, Tx: o.tx, Station: o.hf.station,
		HasStation: hs.HasStation, StationLat: hs.StationLat, StationLon: hs.StationLon}.Degrees()
	if err != nil {
		return err
	}
	if o.out == "" {
		return fmt.Errorf("calibrate needs --out FILE.json for the measured pattern")
	}
	nominal, err := hs.Pattern()
	if err != nil {
		return err
	}
	given, err := hs.Bearing.MountOffset(nominal)
	if err != nil {
		return err
	}
	in, err := o.in.input(cmd, rec.path, &o.idf)
	if err != nil {
		return err
	}
	res, tr, _, err := hs.Survey(cmd.Context(), in, false)
	if err != nil {
		return err
	}
	when := "undated"
	if !res.Info.Start.IsZero() {
		when = res.Info.Start.UTC().Format("2006-01-02")
	}
	cal, err := survey.Calibrate(res, tr, nominal, known, survey.CalibrationOptions{
		Ident: o.ident, Fit: hs.Bearing.Fit, Name: fmt.Sprintf("calibrated %s, nominal %s", when, nominal.Name)})
	if err != nil {
		return err
	}
	total := angle.Wrap180(given + cal.NorthOffsetDeg)
	cal.Pattern.MountOffsetDeg, cal.Pattern.MountOffsetSet = total, true
	if err := o.sf.Save(cmd.ErrOrStderr(), logbook.Recording{Path: rec.path, Result: res}); err != nil {
		return err
	}
	if err := bearing.SavePattern(o.out, cal.Pattern); err != nil {
		return err
	}
	if o.asJSON {
		return json.NewEncoder(cmd.OutOrStdout()).Encode(cal.Line(total, given, how, o.out))
	}
	return cal.WriteReport(cmd.OutOrStdout(), nominal.Name, total, given, how, o.out)
}
