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
package heading
