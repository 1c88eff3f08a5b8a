package watch

import (
	"context"
	"fmt"
	"math"
	"strings"
	"testing"
	"time"

	"nullseek/bearing"
	"nullseek/heading"
	"nullseek/ident"
	"nullseek/ident/idmatch"
	"nullseek/internal/testtool"
	"nullseek/receiver"
	"nullseek/sdr"
	"nullseek/station"
	"nullseek/store"
	"nullseek/survey"
)

// TestChannelWidthAgrees: the width station.Load spaces channels by is
// the receiver's channel filter (station cannot import receiver, so the
// two constants are held equal here).
func TestChannelWidthAgrees(t *testing.T) {
	if station.ChannelHalfWidthHz != receiver.DefaultConfig.StopHz {
		t.Errorf("station.ChannelHalfWidthHz %v, receiver.DefaultConfig.StopHz %v: want them equal", station.ChannelHalfWidthHz, receiver.DefaultConfig.StopHz)
	}
}

// twoChannels is the second beacon of TestWatchTwoChannels: 40 kHz below
// the centre (65 kHz from the first), at 80° true, keyed N0CALL/2, its
// bursts starting 3 s after the first's (so the two are on the air
// together most of the time).
var twoChannels = []struct {
	freqHz, truthDeg float64
	id               string
}{{recChannel, 30, "N0CALL"}, {recCentre - 40e3, 80, "N0CALL/2"}}

// TestWatchTwoChannels: one recording made by GNU Radio 3.10
// (make_rotating.py with --second) holds two beacons on two frequencies,
// each keyed with its own Morse identifier and at its own bearing, heard
// through the one Yagi sweeping. A watch of a two-channel station file,
// served over rtl_tcp with Hamlib's dummy rotator (rotctld 4.5.4 -m 1),
// stores for each channel what survey (scan --freq) finds on that channel
// of the same file with the heading track the watch stored: the same
// bursts (starts within 50 ms), the channel's own identifier, bearings
// within survey's sigma and within 5° of the script's truth; each
// channel's rows say its frequency (capture, burst, schedule); the log and
// status lines name both; sqlite3's PRAGMA integrity_check passes.
func TestWatchTwoChannels(t *testing.T) {
	t.Parallel()
	const seconds = 60.0 // three whole bursts of the second beacon: a schedule each
	dir := t.TempDir()
	b := twoChannels[1]
	meta := makeRecordingOf(t, dir, seconds, fmt.Sprintf("--second=%.0f:%.0f:%s:3", b.freqHz-recCentre, b.truthDeg, b.id),
		"--full-scale", "1.5") // room for two carriers without clipping
	rot, _ := testtool.Rotctld(t)
	var chans string
	for _, c := range twoChannels {
		chans += fmt.Sprintf("[[channel]]\nfreq = %d\nids = [%q]\n", int64(c.freqHz), c.id)
	}
	sp := writeStationWith(t, dir, serve(t, meta), rot, chans)
	sum, st, log, status := watchRun(t, sp, Options{DurationS: seconds})
	t.Logf("log:\n%s\nstatus:\n%s", log, status)
	integrityCheck(t, st.Database)
	if len(sum.Captures) != 2 || sum.Capture != sum.Captures[0] {
		t.Fatalf("captures %v (first %v), want one per channel", sum.Captures, sum.Capture)
	}

	db, err := store.Open(st.Database, store.Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	spec := bearing.DefaultAntenna
	spec.Kind = "yagi"
	p, err := spec.Pattern()
	if err != nil {
		t.Fatal(err)
	}
	bs, err := db.Bearings(store.BearingQuery{Station: st.Name})
	if err != nil {
		t.Fatal(err)
	}
	bearingAt := map[[2]int64]store.Bearing{}
	for _, x := range bs {
		bearingAt[[2]int64{int64(x.Capture), x.BurstStartSample}] = x
	}
	total := 0
	for k, c := range twoChannels {
		cp, err := db.Capture(sum.Captures[k])
		if err != nil || math.Abs(cp.ChannelHz()-c.freqHz) > 0.5 {
			t.Fatalf("channel %d: capture %+v (%v), want its channel at %.0f Hz", k+1, cp, err, c.freqHz)
		}
		bursts, err := db.BurstsOfCapture(sum.Captures[k])
		if err != nil {
			t.Fatal(err)
		}
		hs, _, err := db.Headings(sum.Captures[k])
		if err != nil || len(hs) < 100 {
			t.Fatalf("channel %d: %d headings stored, %v", k+1, len(hs), err)
		}
		tr := &heading.Track{Ref: heading.True}
		for _, h := range hs {
			tr.Samples = append(tr.Samples, heading.Sample{T: h.TimeS, Deg: h.Deg})
		}
		// The reference: survey (what scan --freq runs) on this channel of
		// the same file, with the headings the watch stored.
		src, err := sdr.Open(meta, sdr.RawParams{})
		if err != nil {
			t.Fatal(err)
		}
		idOpts := ident.DefaultOptions()
		idOpts.IDs = []string{c.id}
		res, err := survey.Run(context.Background(), src, survey.Options{Receiver: receiver.Config{FreqHz: c.freqHz}, Ident: idOpts,
			Bearing: &survey.BearingPlan{Track: tr, Pattern: p, Fit: bearing.DefaultFit}}, nil)
		src.Close()
		if err != nil {
			t.Fatal(err)
		}
		if len(res.Records) < 3 || len(bursts) != len(res.Records) {
			t.Fatalf("channel %d (%.4f MHz): watch stored %d bursts, survey found %d; want the same, at least 3", k+1, c.freqHz/1e6, len(bursts), len(res.Records))
		}
		total += len(bursts)
		name := fmt.Sprintf("%.4f MHz", c.freqHz/1e6)
		lines := 0
		for _, l := range strings.Split(log, "\n") {
			if strings.HasPrefix(l, "burst ") && strings.Contains(l, name) {
				lines++
			}
		}
		if lines != len(bursts) {
			t.Errorf("channel %d: %d burst lines name %s, want %d", k+1, lines, name, len(bursts))
		}
		if !strings.Contains(status, name) {
			t.Errorf("the status lines do not name %s:\n%s", name, status)
		}
		fitted, ided := 0, 0
		for i, r := range res.Records {
			wb := bursts[i]
			if d := math.Abs(wb.StartS - r.StartS); d > 0.05 {
				t.Errorf("channel %d burst %d starts at %.3f s in the watch, %.3f s in survey", k+1, i, wb.StartS, r.StartS)
			}
			if math.Abs(wb.FreqHz-c.freqHz) > 1e3 {
				t.Errorf("channel %d burst %d: carrier at %.0f Hz, want within 1 kHz of %.0f Hz", k+1, i, wb.FreqHz, c.freqHz)
			}
			// A burst survey names by fingerprint over the whole file (the
			// last one, cut short by the end) the watch, having read it
			// live, may leave unknown (as in TestWatchMatchesSurvey).
			if r.IdentMethod != "fingerprint" && wb.Ident != r.Ident {
				t.Errorf("channel %d burst %d: watch read %q, survey %q", k+1, i, wb.Ident, r.Ident)
			}
			if idmatch.Known(wb.Ident) {
				ided++
				if wb.Ident != c.id {
					t.Errorf("channel %d burst %d: identified as %q, the channel's beacon is %q", k+1, i, wb.Ident, c.id)
				}
			}
			if r.Fit == nil || r.Fit.Err != nil {
				continue
			}
			x, ok := bearingAt[[2]int64{int64(sum.Captures[k]), wb.StartSample}]
			if !ok {
				t.Errorf("channel %d burst %d: survey fitted %.1f°, the watch stored no bearing", k+1, i, r.Fit.Est.BearingDeg)
				continue
			}
			if d := math.Abs(math.Remainder(x.TrueDeg-r.Fit.Est.BearingDeg, 360)); d > r.Fit.Est.SigmaDeg {
				t.Errorf("channel %d burst %d: watch %.2f°, survey %.2f° ± %.2f°", k+1, i, x.TrueDeg, r.Fit.Est.BearingDeg, r.Fit.Est.SigmaDeg)
			}
			// Against the script's truth; the dummy rotator sweeps from when
			// the watch dialled it, up to half a second (3°) off the
			// recording's antenna (as in TestWatchMatchesSurvey).
			d := math.Abs(math.Remainder(x.TrueDeg-c.truthDeg, 360))
			if d > 5 {
				t.Errorf("channel %d burst %d: bearing %.1f° is %.1f° from the script's %.0f°", k+1, i, x.TrueDeg, d, c.truthDeg)
			}
			t.Logf("channel %d burst %d: watch %.2f° ± %.2f°, survey %.2f°, truth %.0f° (error %.2f°)", k+1, i, x.TrueDeg, x.SigmaDeg, r.Fit.Est.BearingDeg, c.truthDeg, d)
			fitted++
		}
		if fitted == 0 || ided == 0 {
			t.Errorf("channel %d: %d bearings and %d identified bursts to compare; want some of each", k+1, fitted, ided)
		}
		t.Logf("channel %d (%.4f MHz): %d bursts in the watch, %d in survey; %d bearings; %d identified as %s", k+1, c.freqHz/1e6, len(bursts), len(res.Records), fitted, ided, c.id)
	}
	if sum.Bursts != total {
		t.Errorf("the watch logged %d bursts, stored %d", sum.Bursts, total)
	}
	plan, err := db.ScheduleAt(time.Now().Add(time.Hour))
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range twoChannels {
		found := false
		for _, s := range plan {
			if s.Ident == c.id {
				found = true
				if s.ChannelHz != c.freqHz {
					t.Errorf("schedule of %s: channel %.0f Hz, want %.0f Hz", c.id, s.ChannelHz, c.freqHz)
				}
			}
		}
		if !found {
			t.Errorf("no slot schedule of %s stored: %+v", c.id, plan)
		}
	}
}
