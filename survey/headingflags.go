package survey

import (
	"fmt"
	"log/slog"

	"github.com/spf13/pflag"

	"nullseek/bearing"
	"nullseek/capture"
	"nullseek/heading"
	"nullseek/internal/units"
)

// HeadingFlags are the heading and antenna flags of the bearing and
// calibrate commands as the command line gives them: text where a
// grammar reads it (--turn: capture.ParseTurn; --heading-ref:
// heading.ParseRef; --station: units.ParseLatLon), numbers as they are.
// DefaultHeadingFlags gives the flag defaults; Source parses and checks
// them into a HeadingSource.
type HeadingFlags struct {
	// Log, NMEA and Turn are --headings, --nmea and --turn.
	Log, NMEA, Turn string
	// Ref is --heading-ref; Station is --station LAT,LON.
	Ref, Station string
	// NMEARateHz is --nmea-rate, DeclinationDeg --declination.
	NMEARateHz, DeclinationDeg float64
	// EstimateLag is --estimate-lag.
	EstimateLag bool
	// Bearing holds the antenna, site error, mount offset and lag flags.
	Bearing BearingOptions
	// DeclinationSet and MountOffsetGiven say --declination and
	// --mount-offset were given.
	DeclinationSet, MountOffsetGiven bool

	fs *pflag.FlagSet // the flag set Add added the flags to
}

// DefaultHeadingFlags is the flags' defaults: true north and
// DefaultBearingOptions.
func DefaultHeadingFlags() HeadingFlags {
	return HeadingFlags{Ref: heading.True.String(), Bearing: DefaultBearingOptions}
}

// Source parses and checks the flags, in the order the flags are listed
// (antenna and lag, --heading-ref, --declination, --station, --turn), with
// one error naming the flag. live is the track a live capture recorded
// (nil: the flags' source gives it); log receives the summary of skipped
// NMEA lines.
func (f HeadingFlags) Source(live *heading.Track, log *slog.Logger) (*HeadingSource, error) {
	h := &HeadingSource{LogPath: f.Log, NMEAPath: f.NMEA, NMEARateHz: f.NMEARateHz, Live: live,
		DeclinationDeg: f.DeclinationDeg, DeclinationSet: f.DeclinationSet,
		EstimateLag: f.EstimateLag, Bearing: f.Bearing, Logger: log}
	// The fit's own defaults apply (bearing.FitOptions' zero value).
	h.Bearing.Fit = bearing.FitOptions{}
	h.Bearing.MountOffsetGiven = f.MountOffsetGiven
	if err := h.Bearing.Validate(); err != nil {
		return nil, err
	}
	var err error
	if h.Ref, err = heading.ParseRef(f.Ref); err != nil {
		return nil, fmt.Errorf("--heading-ref %w", err)
	}
	if err := h.Validate(); err != nil {
		return nil, err
	}
	if f.Station != "" {
		if h.StationLat, h.StationLon, err = units.ParseLatLon(f.Station); err != nil {
			return nil, fmt.Errorf("--station: %w", err)
		}
		h.HasStation = true
	}
	if f.Turn != "" {
		st, err := capture.ParseTurn(f.Turn, h.Ref)
		if err != nil {
			return nil, err
		}
		h.Turn = &st
	}
	return h, nil
}
