package main

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"nullseek/bearing"
	"nullseek/geo"
	"nullseek/internal/angle"
	"nullseek/internal/units"
	"nullseek/survey"
)

type calibrateOptions struct {
	in                           inputFlags
	idf                          identFlags
	hf                           headingFlags
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
	_ = cmd.Flags().Set("merge-gap", "1.5") // a turning antenna's nulls must not split a burst
	fl := cmd.Flags()
	fl.StringVar(&o.tx, "tx", "", "the calibration transmitter's position LAT,LON in degrees (needs --station)")
	fl.StringVar(&o.knownBearing, "known-bearing", "", "the calibration transmitter's bearing from the station, degrees true (instead of --tx and --station)")
	fl.StringVar(&o.ident, "ident", "", "the calibration transmitter's identifier (or fingerprint label) when several were heard")
	fl.StringVar(&o.out, "out", "", "write the measured pattern here (JSON; required)")
	fl.BoolVar(&o.asJSON, "json", false, "print the result as one JSON object")
	o.lf.add(cmd, &o.in, &o.idf, &o.hf) // live receiver, rotator or compass: live.go
	return cmd
}

func runCalibrate(cmd *cobra.Command, rec recording, o *calibrateOptions) error {
	hs, err := o.hf.source(rec.track)
	if err != nil {
		return err
	}
	known, how, err := o.bearingFrom(hs)
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
	if err := bearing.SavePattern(o.out, cal.Pattern); err != nil {
		return err
	}
	if o.asJSON {
		return json.NewEncoder(cmd.OutOrStdout()).Encode(cal.Line(total, given, how, o.out))
	}
	return writeCalibration(cmd.OutOrStdout(), cal, nominal.Name, total, given, how, o.out)
}

// bearingFrom returns the calibration bearing in degrees true and a
// description of where it came from.
func (o *calibrateOptions) bearingFrom(hs *survey.HeadingSource) (float64, string, error) {
	switch {
	case o.tx != "" && o.knownBearing != "":
		return 0, "", fmt.Errorf("give --tx LAT,LON (with --station) or --known-bearing DEG, not both")
	case o.knownBearing != "":
		v, err := strconv.ParseFloat(strings.TrimSpace(o.knownBearing), 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) || v < -360 || v > 360 {
			return 0, "", fmt.Errorf("--known-bearing %q: want degrees true, e.g. 123.4", o.knownBearing)
		}
		v = angle.Wrap360(v)
		return v, fmt.Sprintf("%.2f° true (given)", v), nil
	case o.tx != "":
		txLat, txLon, err := units.ParseLatLon(o.tx)
		if err != nil {
			return 0, "", fmt.Errorf("--tx: %w", err)
		}
		if !hs.HasStation {
			return 0, "", fmt.Errorf("--tx needs the station's position too: --station LAT,LON")
		}
		dist, az, _ := geo.Inverse(hs.StationLat, hs.StationLon, txLat, txLon)
		if math.IsNaN(az) || !(dist >= 1) {
			return 0, "", fmt.Errorf("--tx %s and --station %s are the same place: no bearing between them", o.tx, o.hf.station)
		}
		az = angle.Wrap360(az)
		if az >= 360 {
			az = 0
		}
		return az, fmt.Sprintf("%.2f° true, %.0f m from the station (geodesic, WGS84)", az, dist), nil
	}
	return 0, "", fmt.Errorf("calibrate needs the transmitter's bearing: --tx LAT,LON with --station LAT,LON, or --known-bearing DEG")
}

func writeCalibration(w io.Writer, cal *survey.Calibration, nominal string, total, given float64, how, path string) error {
	ew := &strings.Builder{}
	s := cal.Shape
	fmt.Fprintf(ew, "calibration transmitter  %s, known bearing %s\n", cal.Ident, how)
	fmt.Fprintf(ew, "used                     %d burst(s), %d level readings, sweep coverage %.0f°\n", cal.Bursts, cal.Points, cal.Alignment.CoverageDeg)
	fmt.Fprintf(ew, "seen at                  %.2f° ± %.2f° with the nominal pattern %q (fit residual %.2f dB)\n", cal.Alignment.BearingDeg, cal.Alignment.SigmaDeg, nominal, cal.Alignment.ResidualDB)
	fmt.Fprintf(ew, "north offset             %+.2f° ± %.2f° (1σ, level noise only) to the middle of the measured main lobe or null", cal.NorthOffsetDeg, cal.SigmaDeg)
	if given != 0 {
		fmt.Fprintf(ew, ", on top of --mount-offset %.2f", given)
	}
	fmt.Fprintln(ew)
	if cal.Pattern.Mode == bearing.Peak {
		fmt.Fprintf(ew, "measured pattern         peak, beamwidth %.1f° (−3 dB), front-to-back %.1f dB, deepest null %.1f dB\n", s.WidthDeg, s.FrontBackDB, s.NullDepthDB)
	} else {
		fmt.Fprintf(ew, "measured pattern         null, null depth %.1f dB, null width %.1f° (+3 dB)\n", s.NullDepthDB, s.WidthDeg)
	}
	for _, warn := range cal.Alignment.Warnings {
		// The nominal pattern is only the starting point: its misfit is
		// what calibration is for.
		fmt.Fprintf(ew, "nominal-pattern fit      %s\n", warn)
	}
	fmt.Fprintf(ew, "saved                    %s\n", path)
	fmt.Fprintf(ew, "heading names            %s\n", cal.Pattern.HeadingRef)
	fmt.Fprintf(ew, "use it                   nullseek bearing REC --antenna %s (it carries the mount offset %+.2f°; the same heading flags as here)\n", path, total)
	_, err := io.WriteString(w, ew.String())
	return err
}
