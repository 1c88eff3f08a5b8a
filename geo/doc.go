// Package geo does the Earth for nullseek: geodesics on WGS84 (Inverse,
// Direct, ENU/FromENU, solved by nullseek/internal/geodesic, a port of
// GeographicLib), magnetic declination (WMM2025), Maidenhead locators, the
// event's map grid, the bearings file formats (a streaming reader, a
// writer, duplicate detection) and the fix itself: the maximum-likelihood
// position of one transmitter from its bearings, with the error ellipse,
// outlier rejection, the 180° ambiguity of loops, grid-cell probabilities
// and GeoJSON/KML export. It does not draw (package mapplot) nor run the
// whole pipeline over files (package locate).
//
// Conventions: latitude and longitude in degrees on WGS84 (north and east
// positive), bearings and azimuths in degrees clockwise from TRUE north in
// [0, 360) unless a name says magnetic, declination east positive (true =
// magnetic + declination), distances in metres, sigmas 1-sigma, ellipse
// sizes semi-axes (centre to edge), times UTC. A refusal is a sentinel
// error (ErrParallel and the others, see SolveFix) wrapped with its details.
package geo
