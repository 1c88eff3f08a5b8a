// Package logbook is the one place where what the one-shot commands find
// becomes rows of the station's store and comes back out of it: a
// survey.Result (capture, transmitters, bursts with their level readings),
// the per-burst bearings and heading track of a bearing run, a slot plan,
// and a locate.Result's fixes are mapped to package store's rows here
// (Save, SaveFixes); bearings, bursts and schedules are read back for
// `fix`, `slots` and `query` (FixSource, Plan, Bearings, ScheduleAt).
//
// Writing is idempotent: every row is written by its natural key (see
// package store), and a capture's key is the SHA-256 of its IQ data
// (store.HashFile), so saving the same recording again changes rows in
// place and adds none.
//
// Conventions follow package store: times UTC, bearings true, degrees in
// [0, 360). Its text outputs round numbers to what the measurement
// supports and give times as RFC 3339 UTC ("Z").
package logbook
