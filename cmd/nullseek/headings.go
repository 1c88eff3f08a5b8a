package main

import (
	"github.com/spf13/cobra"

	"nullseek/bearing"
	"nullseek/heading"
	"nullseek/internal/warnlog"
	"nullseek/survey"
)

// headingFlags are the heading and antenna flags (survey.HeadingFlags);
// source turns them into a survey.HeadingSource.
type headingFlags struct {
	survey.HeadingFlags
	station string // --station, also read by calibrate
	cmd     *cobra.Command
}

func (f *headingFlags) add(cmd *cobra.Command) {
	f.cmd, f.HeadingFlags = cmd, survey.DefaultHeadingFlags()
	fl, bo := cmd.Flags(), &f.Bearing
	fl.StringVar(&f.Log, "headings", "", "heading log CSV: time (seconds from capture start, or RFC 3339), heading degrees")
	fl.StringVar(&f.NMEA, "nmea", "", "file of NMEA 0183 heading sentences (HDT, HDG, HDM), each line optionally led by its time")
	fl.Float64Var(&f.NMEARateHz, "nmea-rate", 0, "sentence rate of an --nmea file of bare sentences (no times), Hz: the k-th sentence is at k/RATE s")
	fl.StringVar(&f.Turn, "turn", "", "steady turn START:RATE[:T0]: heading START° at T0 s (default 0), turning RATE °/s (negative: anticlockwise)")
	fl.StringVar(&f.Ref, "heading-ref", f.Ref, "the headings' north: true or magnetic")
	fl.Float64Var(&f.DeclinationDeg, "declination", 0, "magnetic declination in degrees east (default: WMM2025 at --station and the recording's time)")
	fl.StringVar(&f.station, "station", "", "station position LAT,LON in degrees (for WMM declination and for the bearings CSV)")
	fl.Float64Var(&bo.MountOffsetDeg, "mount-offset", bo.MountOffsetDeg, "the antenna's reference direction (see --antenna) minus the heading source's reading, degrees; a pattern file from calibrate carries its own")
	fl.Float64Var(&bo.LagS, "lag", bo.LagS, "the heading log is late by this many seconds: the heading at capture time t is the log's at t + LAG")
	fl.BoolVar(&f.EstimateLag, "estimate-lag", false, "estimate the heading log's lag from sweeps that turn both ways, and apply it")
	fl.StringVar(&bo.Antenna.Kind, "antenna", bo.Antenna.Kind, bearing.AntennaHelp())
	fl.Float64Var(&bo.Antenna.BeamwidthDeg, "beamwidth", bo.Antenna.BeamwidthDeg, "Yagi -3 dB beamwidth, degrees")
	fl.Float64Var(&bo.Antenna.FrontBackDB, "front-back", bo.Antenna.FrontBackDB, "Yagi front-to-back ratio, dB")
	fl.Float64Var(&bo.Antenna.NullDepthDB, "null-depth", bo.Antenna.NullDepthDB, "small-loop null depth, dB")
	fl.Float64Var(&bo.Antenna.BodyDepthDB, "body-depth", bo.Antenna.BodyDepthDB, "body-shield drop, dB")
	fl.Float64Var(&bo.SiteSigmaDeg, "site-sigma", bo.SiteSigmaDeg, "site error added in quadrature to each bearing's sigma, degrees (multipath one site cannot see)")
}

// source parses the flags (survey.HeadingFlags.Source); live is a live
// capture's track or nil. Skipped NMEA lines are warned about on stderr.
func (f *headingFlags) source(live *heading.Track) (*survey.HeadingSource, error) {
	fl := f.cmd.Flags()
	f.Station, f.DeclinationSet, f.MountOffsetGiven = f.station, fl.Changed("declination"), fl.Changed("mount-offset")
	return f.Source(live, warnlog.New(f.cmd.ErrOrStderr(), "nullseek"))
}
