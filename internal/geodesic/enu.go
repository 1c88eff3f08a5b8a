package geodesic

import "math"

// ENU returns the east and north offsets in metres of the point (lat, lon) from the
// origin (lat0, lon0), all in degrees, on the azimuthal equidistant projection
// centred at the origin on this ellipsoid: the offset vector has the exact geodesic
// length and points along the geodesic azimuth at the origin (PROJ's ellipsoidal
// +proj=aeqd). FromENU is its inverse. At a pole origin, north is the direction of
// the meridian lon0. NaN or |lat| > 90 inputs give NaN.
func (e Ellipsoid) ENU(lat0, lon0, lat, lon float64) (eastM, northM float64) {
	s12, salp1, calp1, _, _ := e.get().inverse(lat0, lon0, lat, lon)
	// salp1, calp1 are the sine and cosine of the azimuth at the origin; the
	// division guards against their last-bit deviation from unit length.
	r := math.Hypot(salp1, calp1)
	return s12 * salp1 / r, s12 * calp1 / r
}

// FromENU returns the point (lat, lon in degrees, lon in [−180, 180]) at east and
// north offsets eastM, northM (metres) from the origin (lat0, lon0) on the
// azimuthal equidistant projection used by ENU, i.e. the end of the geodesic of
// length hypot(east, north) leaving the origin at azimuth atan2(east, north).
// A zero offset returns the origin itself (longitude reduced to [−180, 180]).
func (e Ellipsoid) FromENU(lat0, lon0, eastM, northM float64) (lat, lon float64) {
	s := math.Hypot(eastM, northM)
	if s == 0 && math.Abs(lat0) <= 90 {
		return lat0, angNormalize(lon0)
	}
	lat, lon, _ = e.Direct(lat0, lon0, atan2d(eastM, northM), s)
	return lat, lon
}

// ENU is WGS84.ENU.
func ENU(lat0, lon0, lat, lon float64) (eastM, northM float64) {
	return WGS84.ENU(lat0, lon0, lat, lon)
}

// FromENU is WGS84.FromENU.
func FromENU(lat0, lon0, eastM, northM float64) (lat, lon float64) {
	return WGS84.FromENU(lat0, lon0, eastM, northM)
}
