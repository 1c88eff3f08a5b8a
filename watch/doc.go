// Package watch runs a fixed bearing station by itself for hours from one
// station file: the receiver streams, bursts are found, their Morse
// identifiers read and their bearings fitted against the antenna's heading
// as it turns, and everything goes into the station's SQLite store
// (package store) in batches. It wires the pieces of the offline chain
// (survey.Stream: receiver → ident → bearing) to live sources (an rtl_tcp
// or USB receiver, a Hamlib rotator that it sweeps back and forth, or an
// NMEA 0183 compass) and keeps nothing that grows with the run: the
// receiver's memory is bounded (package receiver), headings are kept for a
// few minutes (KeepHeadingsS), and the slot schedule is refitted on the
// last MaxScheduleBursts bursts. Every [[channel]] of the station file is
// listened to at once from the one receiver stream: each has its own scan,
// expected identifiers, capture row and slot schedule, while the heading
// source, rotator, position and store Writer are shared (see listener and
// fanOut).
//
// Conventions: times are seconds from the stream's sample 0 (the
// sample-count clock of package sdr) whose UTC time is the receiver's
// start; headings are the sensor's degrees clockwise from the north the
// station file names, in [0, 360), stored without the mount offset;
// bearings are stored from TRUE north (a magnetic source's bearings are
// converted with the station's declination or WMM2025 at the station,
// east positive); levels are dBFS.
//
// How a watch ends: when ctx is cancelled (SIGINT or SIGTERM in the
// command) or Options.DurationS of samples have been read, everything
// found so far is committed and Run returns nil; when the receiver fails
// or the database cannot be written, Run returns the error after
// committing what it can. A heading source that fails does not end it:
// bursts are still logged, without bearings, with a warning, and the
// source is dialled again every RetryPeriod until it answers.
package watch
