// Package geodesic solves the direct and inverse geodesic problems on an
// oblate ellipsoid (Karney 2013; a port of GeographicLib's C library, see
// geodesic.go for the notice) and the azimuthal equidistant projection built
// on them. It is internal: package geo is its public face (WGS84 only).
// Angles are degrees, azimuths clockwise from true north, lengths metres.
package geodesic
