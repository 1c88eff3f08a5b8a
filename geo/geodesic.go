package geo

import (
	"nullseek/internal/angle"
	"nullseek/internal/geodesic"
)

// Geodesics on WGS84 (the datum of GPS positions and of WMM), solved by
// nullseek/internal/geodesic: a port of GeographicLib's C library
// (geographiclib-c 2.x, Karney 2013), accurate to about 15 nm.

// Inverse solves the inverse geodesic problem on WGS84: the shortest path from
// (lat1, lon1) to (lat2, lon2), all in degrees. It returns the length s12M in
// metres, the azimuth azi1Deg at point 1 and the forward azimuth azi2Deg at point 2
// (the direction of travel on arrival, GeographicLib's convention; use BackAzimuth
// for the direction from point 2 back to point 1). Azimuths are clockwise from true
// north in [−180°, 180°]. A latitude outside [−90°, 90°] or a NaN input gives NaN
// results. For coincident points s12M is 0 and the azimuths are those of a meridian.
func Inverse(lat1, lon1, lat2, lon2 float64) (s12M, azi1Deg, azi2Deg float64) {
	return geodesic.WGS84.Inverse(lat1, lon1, lat2, lon2)
}

// Direct solves the direct geodesic problem on WGS84: starting at (lat1, lon1) in
// degrees with azimuth azi1Deg (clockwise from north), travel s12M metres (negative
// travels backwards) along the geodesic. It returns the end point (lat2 in
// [−90, 90], lon2 in [−180, 180]) and the forward azimuth azi2Deg there, in
// [−180°, 180°]. A latitude outside [−90°, 90°] or a NaN input gives NaN results.
func Direct(lat1, lon1, azi1Deg, s12M float64) (lat2, lon2, azi2Deg float64) {
	return geodesic.WGS84.Direct(lat1, lon1, azi1Deg, s12M)
}

// BackAzimuth converts a forward azimuth at the end of a geodesic (as returned by
// Inverse or Direct) to the azimuth from that end back to the start, i.e. adds
// 180°. The result is in [0°, 360°) (angle.Wrap360); NaN stays NaN.
func BackAzimuth(azi2Deg float64) float64 { return angle.Wrap360(azi2Deg + 180) }

// ENU returns the east and north offsets in metres of the point (lat, lon) from
// the origin (lat0, lon0), all in degrees, on the WGS84 azimuthal equidistant
// projection centred at the origin: the offset has the exact geodesic length and
// points along the geodesic azimuth at the origin, so range and bearing from the
// origin stay exact at any distance. FromENU is its inverse. At a pole origin,
// north is the direction of the meridian lon0. NaN or |lat| > 90 give NaN.
func ENU(lat0, lon0, lat, lon float64) (eastM, northM float64) {
	return geodesic.WGS84.ENU(lat0, lon0, lat, lon)
}

// FromENU returns the point (lat, lon in degrees, lon in [−180, 180]) at east and
// north offsets (metres) from the origin on the projection used by ENU. A zero
// offset returns the origin itself (longitude reduced to [−180, 180]).
func FromENU(lat0, lon0, eastM, northM float64) (lat, lon float64) {
	return geodesic.WGS84.FromENU(lat0, lon0, eastM, northM)
}
