// Package position knows where the station is. It reads the fixed position
// of a station file, gpsd's TPV reports (gpsd_json(5), gpsd 3.22) or NMEA
// 0183 GGA and RMC sentences from a serial port, file or connection, and
// keeps the fixes in a Track that answers "where was the station at time
// t?" by interpolating along the WGS84 geodesic between fixes, so a moving
// station stamps each bearing with where it was taken. It never reads
// headings (that is package heading) and never opens serial ports or
// station files itself (NewNMEA takes an io.Reader; FromStation a parsed
// station.File).
//
// Every source satisfies Source: Run feeds it until the context ends, At
// answers from its Track. At refuses, with ErrStale, a time further than
// the staleness limit (DefaultStaleness, 5 s) from every fix it could use,
// and never interpolates across a gap longer than DefaultMaxGap (10 s).
//
// Conventions: latitude and longitude in degrees on WGS84, north and east
// positive; heights in metres, above the ellipsoid (AltHAEM, as the station
// file's alt_m) or above mean sea level (AltMSLM), each given only when the
// source gives it; times are UTC wall-clock times (time.Time), not the
// capture-relative seconds of package heading. Error estimates are only
// what the source states: gpsd's eph/epx/epy in metres, NMEA's HDOP as a
// dimensionless HDOP, never turned into metres.
package position
