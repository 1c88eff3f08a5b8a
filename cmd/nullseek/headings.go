package main

import (
	"fmt"

	"github.com/spf13/cobra"

	"nullseek/bearing"
	"nullseek/capture"
	"nullseek/heading"
	"nullseek/internal/units"
	"nullseek/internal/warnlog"
	"nullseek/survey"
)

// headingFlags select where the antenna's heading comes from and how the
// antenna is modelled; source turns them into survey.HeadingSource.
type headingFlags struct {
	log, nmea, turn, ref, station string
	nmeaRate, declination         float64
	estimateLag                   bool
	bo                            survey.BearingOptions
	cmd                           *cobra.Command
}

func (f *headingFlags) add(cmd *cobra.Command) {
	f.cmd, f.bo = cmd, survey.DefaultBearingOptions
	fl := cmd.Flags()
	fl.StringVar(&f.log, "headings", "", "heading log CSV: time (seconds from capture start, or RFC 3339), heading degrees")
	fl.StringVar(&f.nmea, "nmea", "", "file of NMEA 0183 heading sentences (HDT, HDG, HDM), each line optionally led by its time")
	fl.Float64Var(&f.nmeaRate, "nmea-rate", 0, "sentence rate of an --nmea file of bare sentences (no times), Hz: the k-th sentence is at k/RATE s")
	fl.StringVar(&f.turn, "turn", "", "steady turn START:RATE[:T0]: heading START° at T0 s (default 0), turning RATE °/s (negative: anticlockwise)")
	fl.StringVar(&f.ref, "heading-ref", heading.True.String(), "the headings' north: true or magnetic")
	fl.Float64Var(&f.declination, "declination", 0, "magnetic declination in degrees east (default: WMM2025 at --station and the recording's time)")
	fl.StringVar(&f.station, "station", "", "station position LAT,LON in degrees (for WMM declination and for the bearings CSV)")
	fl.Float64Var(&f.bo.MountOffsetDeg, "mount-offset", f.bo.MountOffsetDeg, "the antenna's reference direction (see --antenna) minus the heading source's reading, degrees; a pattern file from calibrate carries its own")
	fl.Float64Var(&f.bo.LagS, "lag", f.bo.LagS, "heading timestamps lag the level by this many seconds")
	fl.BoolVar(&f.estimateLag, "estimate-lag", false, "estimate the heading/level lag from sweeps that turn both ways, and remove it")
	fl.StringVar(&f.bo.Antenna.Kind, "antenna", f.bo.Antenna.Kind, bearing.AntennaHelp())
	fl.Float64Var(&f.bo.Antenna.BeamwidthDeg, "beamwidth", f.bo.Antenna.BeamwidthDeg, "Yagi -3 dB beamwidth, degrees")
	fl.Float64Var(&f.bo.Antenna.FrontBackDB, "front-back", f.bo.Antenna.FrontBackDB, "Yagi front-to-back ratio, dB")
	fl.Float64Var(&f.bo.Antenna.NullDepthDB, "null-depth", f.bo.Antenna.NullDepthDB, "small-loop null depth, dB")
	fl.Float64Var(&f.bo.Antenna.BodyDepthDB, "body-depth", f.bo.Antenna.BodyDepthDB, "body-shield drop, dB")
	fl.Float64Var(&f.bo.SiteSigmaDeg, "site-sigma", f.bo.SiteSigmaDeg, "site error added in quadrature to each bearing's sigma, degrees (multipath one site cannot see)")
}

// source parses and checks the heading flags; live is the track a live
// capture recorded (nil: the flags' source gives it). Skipped NMEA lines
// are warned about on the command's stderr.
func (f *headingFlags) source(live *heading.Track) (*survey.HeadingSource, error) {
	fl := f.cmd.Flags()
	h := &survey.HeadingSource{LogPath: f.log, NMEAPath: f.nmea, NMEARateHz: f.nmeaRate, Live: live,
		DeclinationDeg: f.declination, DeclinationSet: fl.Changed("declination"),
		EstimateLag: f.estimateLag, Bearing: f.bo, Logger: warnlog.New(f.cmd.ErrOrStderr(), "nullseek")}
	h.Bearing.Fit = bearing.FitOptions{}
	h.Bearing.MountOffsetGiven = fl.Changed("mount-offset")
	if err := h.Bearing.Validate(); err != nil {
		return nil, err
	}
	var err error
	if h.Ref, err = heading.ParseRef(f.ref); err != nil {
		return nil, fmt.Errorf("--heading-ref %w", err)
	}
	if err := h.Validate(); err != nil { // --declination before --station, as the flags are listed
		return nil, err
	}
	if f.station != "" {
		if h.StationLat, h.StationLon, err = units.ParseLatLon(f.station); err != nil {
			return nil, fmt.Errorf("--station: %w", err)
		}
		h.HasStation = true
	}
	if f.turn != "" {
		st, err := capture.ParseTurn(f.turn, h.Ref)
		if err != nil {
			return nil, err
		}
		h.Turn = &st
	}
	return h, nil
}
