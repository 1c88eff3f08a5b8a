package capture

import (
	"context"
	"errors"
	"fmt"
	"strings"

	"nullseek/heading"
)

// Help is the live capture's part of a command's help: what to give in
// place of a recording, and how a capture ends (Analyse).
const Help = `Live: give rtl_tcp://HOST:PORT (or usb://INDEX in a build with USB) instead
of a recording, with --freq (the channel; the receiver tunes a quarter of
--rate below it unless --center is given), --rate (default 250k) and
--gain. With --rotator HOST:PORT (Hamlib rotctld) and --sweep FROM:TO or
--step FROM:STEP:TO:DWELL the antenna is turned while the receiver records;
the capture ends --margin seconds after the sweep (or at --duration) and is
fitted as usual. Without --rotator give --duration and a heading source
(--turn for a steady hand turn, or --nmea-feed ADDR for a compass that
sends NMEA 0183 headings, stamped as they arrive; --heading-ref picks its
HDT or HDM sentences as for --nmea). --record FILE keeps
FILE.sigmf-meta/.sigmf-data and the heading log FILE.csv; --record DIR (an
existing directory) keeps SigMF pairs named by their start time there, with
core:geolocation from --station. On a terminal a status line shows the
level, its SNR over the band's floor, the heading and the progress; when
standard error is not a terminal, a plain status line every 10 s.

Ctrl-C (SIGINT) or SIGTERM stops the rotator, keeps what was captured (with
--record), removes temporary files and exits with 130 or 143. A receiver
that fails mid-capture keeps what it gave, which is analysed when long
enough; the command then exits 1.`

// Analyse captures with o, then runs analyse on the recording: on a whole
// capture, or on what a failed receiver gave when it is enough
// (Result.Analysable), saying so in o.Notes. SIGINT and SIGTERM
// (NotifySignals) end either with what was kept (Result.
// InterruptedAnalysis). meta is the recording's SigMF metadata, track the
// heading track recorded with it; rerun is the command line that re-runs
// a kept capture offline, less its arguments ("nullseek bearing").
//
// The error is the capture's when the receiver failed (with a note of
// what the analysis of its part said), else the analysis's, in which a
// temporary recording's name is replaced by "the live capture" (it is
// gone when the error is read).
func Analyse(ctx context.Context, o Options, rerun string, analyse func(ctx context.Context, meta string, track *heading.Track) error) error {
	notes := o.Notes
	if notes == nil {
		notes = func(string) {}
	}
	ctx, stop := NotifySignals(ctx)
	defer stop()
	res, err := Run(ctx, o)
	if res == nil {
		return err
	}
	defer res.Close()
	for _, w := range res.Warnings {
		notes(w)
	}
	var fault *ReceiverFault
	switch {
	case err == nil:
		notes(res.recordedNote(rerun))
	case errors.As(err, &fault) && res.Analysable():
		notes(fmt.Sprintf("the receiver failed %.1f s into the capture: analysing what it gave", res.Seconds()))
	default:
		return err
	}
	aerr := analyse(ctx, res.Meta, res.Track)
	if aerr != nil && !res.Kept {
		aerr = errors.New(strings.ReplaceAll(aerr.Error(), res.Meta, "the live capture"))
	}
	if ctx.Err() != nil {
		return res.InterruptedAnalysis(context.Cause(ctx))
	}
	if err != nil {
		if aerr != nil {
			notes(fmt.Sprintf("the %.1f s captured gave no result: %v", res.Seconds(), aerr))
		}
		return err
	}
	return aerr
}

// recordedNote says what a whole capture recorded and how to re-run it.
func (r *Result) recordedNote(rerun string) string {
	if len(r.Rotated) > 0 {
		return "recorded " + strings.TrimPrefix(r.kept(), "kept ")
	}
	if !r.Kept {
		return fmt.Sprintf("recorded %.1f s", r.Seconds())
	}
	rerun += " " + r.Meta
	if r.HeadingLog != "" {
		rerun += " --headings " + r.HeadingLog + " (with the same other flags, less the live heading source)"
	} else {
		rerun += " (with the same other flags)"
	}
	return fmt.Sprintf("recorded %.1f s to %s; re-run offline: %s", r.Seconds(), r.Meta, rerun)
}
