package geo

import (
	"fmt"
	"math"
	"time"
)

// LOP is one line of position: a bearing taken at a station.
//
// BearingDeg is clockwise from TRUE north in [0, 360); SigmaDeg is the
// 1-sigma bearing uncertainty in degrees (> 0). Time is the UTC time of the
// bearing, zero when unknown. Row is the 1-based input row the bearing came
// from (the header is row 1 in a CSV), 0 when the LOP was built in code; it
// is used only in messages.
type LOP struct {
	Ident      string
	Station    string
	Lat, Lon   float64
	BearingDeg float64
	SigmaDeg   float64
	Time       time.Time
	Row        int
	// Ambiguous marks a bearing whose reciprocal (BearingDeg+180°) fits the
	// measurement equally, such as a small loop's two nulls;
	// SolveFixAmbiguous picks the direction the other bearings support.
	Ambiguous bool
}

// Validate checks that the LOP can be used in a fix: latitude within ±90°,
// longitude within ±180° (inclusive), finite bearing, 0 < sigma < 90°.
func (l LOP) Validate() error {
	switch {
	case !(l.Lat >= -90 && l.Lat <= 90):
		return fmt.Errorf("station %q: latitude %v is outside -90..90", l.Station, l.Lat)
	case !(l.Lon >= -180 && l.Lon <= 180):
		return fmt.Errorf("station %q: longitude %v is outside -180..180", l.Station, l.Lon)
	case math.IsNaN(l.BearingDeg) || math.IsInf(l.BearingDeg, 0):
		return fmt.Errorf("station %q: bearing %v is not a finite number", l.Station, l.BearingDeg)
	case !(l.SigmaDeg > 0 && l.SigmaDeg < 90):
		return fmt.Errorf("station %q: sigma %v must be greater than 0 and less than 90 degrees", l.Station, l.SigmaDeg)
	}
	return nil
}

// where names the LOP for messages: "station S1 (row 4)".
func (l LOP) where() string {
	if l.Row > 0 {
		return fmt.Sprintf("station %q (row %d)", l.Station, l.Row)
	}
	return fmt.Sprintf("station %q", l.Station)
}

// wrapPi maps an angle in radians to (-π, π].
func wrapPi(a float64) float64 {
	a = math.Mod(a, 2*math.Pi)
	if a > math.Pi {
		a -= 2 * math.Pi
	} else if a <= -math.Pi {
		a += 2 * math.Pi
	}
	return a
}

const (
	deg = math.Pi / 180
	rad = 180 / math.Pi
)
