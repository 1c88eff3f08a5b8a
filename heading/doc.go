// Package heading knows where the antenna points. It reads heading samples
// from logs, NMEA 0183 compass sentences, a Hamlib rotctld rotator or a
// constant-rate turn model, and turns them into a Track that answers "which
// way did the antenna point at capture time t?" with interpolation across
// 359°→0°. It never fits bearings (that is package bearing) and never
// computes magnetic declination (that is package geo; ToTrue takes the
// number).
//
// Conventions: angles are degrees clockwise from north at the package edge,
// normalised to [0, 360); times are seconds from the capture start (the
// sample-count clock of package sdr), converted from UTC with the capture's
// start time where a source delivers wall-clock stamps.
//
// Lag convention (the one the whole module uses): a lag is how late the
// heading log is, in seconds. lag > 0 means the log is late: the heading
// at capture time t is the log's value at t + lag, and a sample stamped T
// describes the antenna at capture time T − lag. Track.LagS holds it,
// two Track helpers apply it (logTime, captureTime: At, Span, Gaps,
// Coverage and Sweeps go through them), bearing.EstimateLag
// measures it with the same sign, and --lag and the station file's
// heading.lag_s give it.
package heading
