// Package capture records a live session. A receiver (rtl_tcp, or an
// RTL-SDR on USB in a build with the rtlsdr tag) streams IQ into a SigMF
// recording while the antenna's heading comes from a Hamlib rotator that
// this package turns, from an NMEA 0183 compass, or from a steady turn; Run
// puts the headings on the recording's clock and returns the recording and
// the heading track as values. It never scans, identifies or fits: the
// caller runs its offline pipeline on what Run returns, so a live session
// and its offline re-run give the same answer.
//
// Conventions: times are seconds from the recording's sample 0 (the
// sample-count clock of package sdr), whose UTC time is Result.Info.Start;
// headings are degrees clockwise from the north named by the Track's Ref,
// in [0, 360); rotator azimuths in a SweepPlan are rotctld's own numbers
// (not wrapped: a rotator with overlap accepts −180…450). Levels are
// dB relative to a full-scale complex tone (dBFS: 0 dB is |x| = 1, the
// rails of the receiver's 8-bit samples).
//
// How a capture ends:
//   - normally, at Options.DurationS of samples or MarginS after the sweep;
//   - by cancellation (NotifySignals turns SIGINT and SIGTERM into one): what
//     was captured so far is kept, written with Options.Record, and returned
//     with an *Interrupted error;
//   - by a receiver fault (the stream cut, the server gone): the same, with a
//     *ReceiverFault error;
//   - by a failing heading source (rotctld gone, a compass that hangs up or
//     falls silent) or a failing disk: nothing is kept. The headings are what
//     the capture is for, and a source that fails may have stopped describing
//     the antenna some time before it was noticed.
//
// On every way out, panics included, a rotator this package turned is told to
// stop (rotctld `S`, Hamlib rotctld(1) 4.5.4) and its position is read back;
// a rotator turns with force, so stopping it is a safety matter.
package capture
