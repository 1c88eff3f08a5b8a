package position

import (
	"context"
	"fmt"
	"math"
	"time"
)

// Mode is how many dimensions a fix has, numbered as gpsd's TPV "mode"
// (gpsd_json(5), gpsd 3.22: 0 no mode value yet seen, 1 no fix, 2 2D, 3 3D).
type Mode int

const (
	ModeUnknown Mode = 0
	ModeNoFix   Mode = 1
	Mode2D      Mode = 2
	Mode3D      Mode = 3
)

// String names the mode as tables print it.
func (m Mode) String() string {
	switch m {
	case ModeNoFix:
		return "no fix"
	case Mode2D:
		return "2D"
	case Mode3D:
		return "3D"
	}
	return "unknown"
}

// Fix is where the station was at one moment. Angles are degrees (WGS84
// latitude north positive, longitude east positive), lengths metres.
type Fix struct {
	// Time is when the position was measured, UTC.
	Time time.Time
	// LatDeg, LonDeg: latitude in [-90, 90], longitude in [-180, 180].
	LatDeg, LonDeg float64
	// AltHAEM is height above the WGS84 ellipsoid and AltMSLM height above
	// mean sea level (the geoid); nil when the source does not give it.
	// From NMEA GGA, MSL is field 9 and HAE = MSL + geoid separation
	// (field 11), given only when field 11 is present.
	AltHAEM, AltMSLM *float64
	// Mode is 2D or 3D for a usable fix.
	Mode Mode
	// Quality is the NMEA GGA fix quality indicator (field 6: 1 GPS,
	// 2 DGPS, 4 RTK fixed, 5 RTK float, 6 estimated …), 0 when the source
	// gave none (RMC only, gpsd).
	Quality int
	// HErrM is a horizontal error estimate in metres when the source gives
	// one: gpsd's TPV "eph", else the larger of "epx" and "epy" (both 95 %
	// confidence, gpsd_json(5)). Nil otherwise: an NMEA feed gives HDOP,
	// which is not metres and is never turned into metres here.
	HErrM *float64
	// HDOP is the GGA horizontal dilution of precision (field 8),
	// dimensionless; nil when absent.
	HDOP *float64
	// Source names where the fix came from ("fixed", "gpsd
	// 127.0.0.1:2947", "nmea /dev/ttyUSB0").
	Source string
	// Held is set by Track.At when no fix brackets the asked time and the
	// nearest fix was held: how far the asked time lies from the fix that
	// was measured. Zero for a measured or interpolated fix.
	Held time.Duration
}

// Usable reports whether f is a 2D or 3D fix with finite coordinates in
// range and a time: the fixes a Track keeps.
func (f Fix) Usable() error {
	switch {
	case f.Mode != Mode2D && f.Mode != Mode3D:
		return fmt.Errorf("%w: mode %s", ErrNoFix, f.Mode)
	case f.Time.IsZero():
		return fmt.Errorf("%w: no time", ErrNoFix)
	case !(f.LatDeg >= -90 && f.LatDeg <= 90) || !(f.LonDeg >= -180 && f.LonDeg <= 180):
		return fmt.Errorf("%w: latitude %v, longitude %v out of range", ErrNoFix, f.LatDeg, f.LonDeg)
	}
	for _, p := range []*float64{f.AltHAEM, f.AltMSLM, f.HErrM, f.HDOP} {
		if p != nil && (math.IsNaN(*p) || math.IsInf(*p, 0)) {
			return fmt.Errorf("%w: a non-finite altitude or error estimate", ErrNoFix)
		}
	}
	return nil
}

// Source is where a station's position comes from: a fixed position from
// the station file, gpsd, or an NMEA 0183 GGA/RMC feed. One interface, so
// callers stamp a bearing with At(capture time) whichever it is.
type Source interface {
	// Name says what the source is, for messages and stored rows.
	Name() string
	// Run feeds the source's Track until ctx ends (it then returns nil)
	// or the feed fails for good. A fixed source has nothing to feed and
	// only waits for ctx. Call it once, in its own goroutine.
	Run(ctx context.Context) error
	// At returns where the station was at t (Track.At); safe to call while
	// Run is going.
	At(t time.Time) (Fix, error)
}

func ptr(x float64) *float64 { return &x }
