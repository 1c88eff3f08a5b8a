package main

import (
	"context"
	"fmt"
	"math"
	"os"
	"strconv"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"nullseek/bearing"
	"nullseek/capture"
	"nullseek/geo"
	"nullseek/heading"
	"nullseek/sdr"
	"nullseek/survey"
)

// headingFlags select where the antenna's heading comes from and how the
// antenna is modelled (bo: the options survey owns, with their defaults).
type headingFlags struct {
	log, nmea, turn string
	ref             string
	declination     string
	station         string
	estimateLag     bool
	bo              survey.BearingOptions
	cmd             *cobra.Command
	nmeaRate        float64
}

func (f *headingFlags) add(cmd *cobra.Command) {
	f.cmd = cmd
	d := survey.DefaultBearingOptions
	fl := cmd.Flags()
	fl.StringVar(&f.log, "headings", "", "heading log CSV: time (seconds from capture start, or RFC 3339), heading degrees")
	fl.StringVar(&f.nmea, "nmea", "", "file of NMEA 0183 heading sentences (HDT, HDG, HDM), each line optionally led by its time")
	fl.Float64Var(&f.nmeaRate, "nmea-rate", 0, "sentence rate of an --nmea file of bare sentences (no times), Hz: the k-th sentence is at k/RATE s")
	fl.StringVar(&f.turn, "turn", "", "steady turn START:RATE[:T0]: heading START° at T0 s (default 0), turning RATE °/s (negative: anticlockwise)")
	fl.StringVar(&f.ref, "heading-ref", "true", "the headings' north: true or magnetic")
	fl.StringVar(&f.declination, "declination", "", "magnetic declination in degrees east (default: WMM2025 at --station and the recording's time)")
	fl.StringVar(&f.station, "station", "", "station position LAT,LON in degrees (for WMM declination and for the bearings CSV)")
	fl.Float64Var(&f.bo.MountOffsetDeg, "mount-offset", d.MountOffsetDeg, "the antenna's reference direction (see --antenna) minus the heading source's reading, degrees; a pattern file from calibrate carries its own")
	fl.Float64Var(&f.bo.LagS, "lag", d.LagS, "heading timestamps lag the level by this many seconds")
	fl.BoolVar(&f.estimateLag, "estimate-lag", false, "estimate the heading/level lag from sweeps that turn both ways, and remove it")
	fl.StringVar(&f.bo.Antenna.Kind, "antenna", d.Antenna.Kind, bearing.AntennaHelp())
	fl.Float64Var(&f.bo.Antenna.BeamwidthDeg, "beamwidth", d.Antenna.BeamwidthDeg, "Yagi -3 dB beamwidth, degrees")
	fl.Float64Var(&f.bo.Antenna.FrontBackDB, "front-back", d.Antenna.FrontBackDB, "Yagi front-to-back ratio, dB")
	fl.Float64Var(&f.bo.Antenna.NullDepthDB, "null-depth", d.Antenna.NullDepthDB, "small-loop null depth, dB")
	fl.Float64Var(&f.bo.Antenna.BodyDepthDB, "body-depth", d.Antenna.BodyDepthDB, "body-shield drop, dB")
	fl.Float64Var(&f.bo.SiteSigmaDeg, "site-sigma", d.SiteSigmaDeg, "site error added in quadrature to each bearing's sigma, degrees (multipath one site cannot see)")
}

// options returns the validated bearing options.
func (f *headingFlags) options() (survey.BearingOptions, error) {
	o := f.bo
	o.Fit = bearing.FitOptions{}
	o.MountOffsetGiven = f.cmd != nil && f.cmd.Flags().Changed("mount-offset")
	if err := o.Validate(); err != nil {
		return o, err
	}
	// The heading source's flags are checked here too, so that a bad one
	// stops the command before any recording is read.
	if _, err := headingRef(f.ref); err != nil {
		return o, err
	}
	if _, err := f.declinationFlag(); err != nil {
		return o, err
	}
	if _, _, _, err := f.stationPos(); err != nil {
		return o, err
	}
	return o, nil
}

// declinationFlag parses --declination: NaN when it was not given.
func (f *headingFlags) declinationFlag() (deg float64, err error) {
	if f.declination == "" {
		return math.NaN(), nil
	}
	d, err := strconv.ParseFloat(strings.TrimSpace(f.declination), 64)
	if err != nil || !(d >= -180 && d <= 180) {
		return 0, fmt.Errorf("--declination %q: want degrees east (negative west) within ±180", f.declination)
	}
	return d, nil
}

// pattern builds the antenna pattern (after checking every bearing option).
func (f *headingFlags) pattern() (bearing.Pattern, error) {
	o, err := f.options()
	if err != nil {
		return bearing.Pattern{}, err
	}
	p, err := o.Antenna.Pattern()
	if err != nil {
		return bearing.Pattern{}, err
	}
	if _, err := o.MountOffset(p); err != nil {
		return bearing.Pattern{}, err
	}
	return p, nil
}

// mountOffset is the mount offset to use with pattern p (--mount-offset,
// or the one a calibrated pattern file carries).
func (f *headingFlags) mountOffset(p bearing.Pattern) (float64, error) {
	o, err := f.options()
	if err != nil {
		return 0, err
	}
	return o.MountOffset(p)
}

// stationPos parses --station; ok is false when it was not given.
func (f *headingFlags) stationPos() (lat, lon float64, ok bool, err error) {
	if f.station == "" {
		return 0, 0, false, nil
	}
	parts := strings.Split(f.station, ",")
	if len(parts) != 2 {
		return 0, 0, false, fmt.Errorf("--station %q: want LAT,LON in degrees", f.station)
	}
	lat, err1 := strconv.ParseFloat(strings.TrimSpace(parts[0]), 64)
	lon, err2 := strconv.ParseFloat(strings.TrimSpace(parts[1]), 64)
	if err1 != nil || err2 != nil || !(lat >= -90 && lat <= 90) || !(lon >= -180 && lon <= 180) {
		return 0, 0, false, fmt.Errorf("--station %q: want LAT,LON with latitude within ±90 and longitude within ±180", f.station)
	}
	return lat, lon, true, nil
}

// headingRef reads --heading-ref.
func headingRef(s string) (heading.Ref, error) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "true", "t":
		return heading.True, nil
	case "magnetic", "mag", "m":
		return heading.Magnetic, nil
	}
	return heading.True, fmt.Errorf("--heading-ref %q: want true or magnetic", s)
}

// track reads the heading source and returns a true-north track over the
// recording described by info; live, when not nil, is the track a live
// capture recorded in place of the heading flags' source. notes receives
// warnings for the user.
func (f *headingFlags) track(info sdr.Info, live *heading.Track, notes func(string)) (*heading.Track, error) {
	ref, err := headingRef(f.ref)
	if err != nil {
		return nil, err
	}
	pat, err := f.pattern()
	if err != nil {
		return nil, err
	}
	mount, err := f.mountOffset(pat)
	if err != nil {
		return nil, err
	}
	given := 0
	for _, s := range []string{f.log, f.nmea, f.turn} {
		if s != "" {
			given++
		}
	}
	if given != 1 && live == nil {
		return nil, fmt.Errorf("give exactly one heading source: --headings FILE, --nmea FILE or --turn START:RATE")
	}
	if f.nmeaRate != 0 && f.nmea == "" {
		return nil, fmt.Errorf("--nmea-rate paces the sentences of an --nmea FILE: drop it or give --nmea")
	}
	var tr *heading.Track
	switch {
	case live != nil:
		tr = live
	case f.log != "":
		fh, err := os.Open(f.log)
		if err != nil {
			return nil, fmt.Errorf("--headings: %w", err)
		}
		defer fh.Close()
		tr, err = heading.ReadLog(fh, info.Start, ref)
		if err != nil {
			return nil, fmt.Errorf("--headings %s: %w", f.log, err)
		}
	case f.nmea != "":
		fh, err := os.Open(f.nmea)
		if err != nil {
			return nil, fmt.Errorf("--nmea: %w", err)
		}
		defer fh.Close()
		var st heading.NMEAStats
		tr, st, err = heading.ReadNMEA(fh, heading.NMEAFileOptions{Ref: ref, CaptureStart: info.Start, PaceHz: f.nmeaRate, Name: f.nmea})
		if err != nil {
			return nil, fmt.Errorf("--nmea: %w", err)
		}
		if st.Skipped() > 0 {
			notes(fmt.Sprintf("--nmea %s: %s", f.nmea, st))
		}
	default:
		st, err := capture.ParseTurn(f.turn, ref)
		if err != nil {
			return nil, err
		}
		dur := 3600.0
		if info.Samples > 0 {
			dur = float64(info.Samples) / info.SampleRate
		}
		if tr, err = capture.TurnTrack(st, dur); err != nil {
			return nil, err
		}
	}
	if ref == heading.Magnetic {
		decl, err := f.declinationAt(info.Start, notes)
		if err != nil {
			return nil, err
		}
		tr = tr.ToTrue(decl)
	}
	tr = tr.WithOffset(mount).WithLag(f.bo.LagS)
	return tr, nil
}

// declinationAt is --declination, or WMM2025 at --station and time t.
func (f *headingFlags) declinationAt(t time.Time, notes func(string)) (float64, error) {
	if d, err := f.declinationFlag(); err != nil || !math.IsNaN(d) {
		return d, err
	}
	lat, lon, ok, err := f.stationPos()
	if err != nil {
		return 0, err
	}
	if !ok {
		return 0, fmt.Errorf("magnetic headings need the declination: give --station LAT,LON (WMM2025) or --declination DEG")
	}
	if t.IsZero() {
		t = time.Now().UTC()
		notes("the recording has no start time: declination computed for today")
	}
	d, warn := geo.Declination(lat, lon, 0, t)
	if warn != nil {
		if d != d { // NaN: bad input
			return 0, fmt.Errorf("declination: %w", warn)
		}
		notes("declination: " + warn.Error())
	}
	notes(fmt.Sprintf("magnetic headings converted to true with WMM2025 declination %+.2f°", d))
	return d, nil
}

// surveyWithTrack surveys the recording at path and joins it with the
// heading source: the track on the recording's clock, with the lag
// estimated and removed when --estimate-lag asks for it.
//
// With fitDuringScan (and no lag to estimate first) the bearings are fitted
// while the scan goes on (survey.Options.Bearing), so that a transmission
// of any length gets one with bounded memory.
func (f *headingFlags) surveyWithTrack(ctx context.Context, rec recording, in *inputFlags, idf *identFlags, pat bearing.Pattern, fo bearing.FitOptions, fitDuringScan bool, notes func(string)) (*survey.Result, *heading.Track, error) {
	// Read the heading source before the long scan, so a bad log costs
	// no time; the recording's metadata gives the clock it needs.
	path := rec.path
	src, err := in.open(path)
	if err != nil {
		return nil, nil, err
	}
	info := src.Info()
	src.Close()
	tr, err := f.track(info, rec.track, notes)
	if err != nil {
		return nil, nil, err
	}
	if f.estimateLag {
		var turns []float64
		for _, sw := range tr.Sweeps() {
			turns = append(turns, sw.TurnDeg)
		}
		if err := bearing.CheckLagTurns(turns...); err != nil {
			return nil, nil, fmt.Errorf("--estimate-lag: %w (give --lag instead)", err)
		}
	}
	var plan *survey.BearingPlan
	if fitDuringScan && !f.estimateLag {
		plan = &survey.BearingPlan{Track: tr, Pattern: pat, Fit: fo, WindowS: f.bo.WindowS}
	}
	res, err := surveyRecordingPlan(ctx, path, in, idf, plan, notes)
	if err != nil {
		return nil, nil, err
	}
	if f.estimateLag {
		lag, sig, err := survey.EstimateLag(res, tr, pat, fo)
		if err != nil {
			return nil, nil, err
		}
		// lag is what is left on top of --lag; take it off.
		notes(fmt.Sprintf("level lags heading by %.3f ± %.3f s: removed (give --lag %.3f in later fits)", lag, sig, tr.LagS-lag))
		tr = tr.WithLag(tr.LagS - lag)
	}
	return res, tr, nil
}
