package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"log/slog"
	"math"
	"nullseek/internal/atomicfile"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"nullseek/heading"
	"nullseek/sdr"
	"nullseek/survey"
)

// liveScheme marks a live receiver given in place of a recording.
const liveScheme = "rtl_tcp://"

// rtlTCPTransferSamples is how many samples one rtl_tcp read carries:
// rtl_tcp.c calls rtlsdr_read_async(dev, cb, NULL, buf_num, 0), and a
// buf_len of 0 means the default 16·32·512 bytes (rtl-sdr.h, librtlsdr-dev
// 0.6) = 131072 cu8 samples. A transfer is sent when it is full, so the
// first sample reaches us about one transfer's duration after it was taken.
const rtlTCPTransferSamples = 16 * 32 * 512 / 2

// liveFlags are the flags of a live capture (RECORDING = rtl_tcp://HOST:PORT).
type liveFlags struct {
	rotator  string
	sweep    string
	step     string
	duration float64
	margin   float64
	record   string
	gain     string
	ppm      int
	latency  string
	pollHz   float64
	compass  string
}

func (f *liveFlags) add(cmd *cobra.Command) {
	fl := cmd.Flags()
	fl.StringVar(&f.rotator, "rotator", "", "live: rotctld HOST:PORT that turns the antenna during the capture (needs --sweep or --step)")
	fl.StringVar(&f.sweep, "sweep", "", "live: continuous rotator sweep FROM:TO, rotator azimuths in degrees")
	fl.StringVar(&f.step, "step", "", "live: stepped rotator sweep FROM:STEP:TO:DWELL (degrees, dwell in seconds)")
	fl.Float64Var(&f.duration, "duration", 0, "live: stop the capture after this many seconds (required without --rotator)")
	fl.Float64Var(&f.margin, "margin", survey.DefaultLiveMarginS, "live: keep recording this many seconds after the sweep ends")
	fl.StringVar(&f.record, "record", "", "live: keep the capture as FILE.sigmf-meta/.sigmf-data and its heading log FILE.csv, to re-run offline")
	fl.StringVar(&f.gain, "gain", "auto", "live: tuner gain in dB, or auto")
	fl.IntVar(&f.ppm, "ppm", 0, "live: receiver frequency correction, parts per million")
	fl.StringVar(&f.latency, "iq-latency", "rtl_tcp", "live: seconds the samples take to arrive, taken off the capture start so headings and levels line up; rtl_tcp = measured from the stream (earliest arrival less the samples received), or give seconds to fix it")
	fl.Float64Var(&f.pollHz, "poll-hz", heading.DefaultPollHz, "live: rotator position polls per second")
	fl.StringVar(&f.compass, feedFlag, "", "live: NMEA 0183 compass (HDT, HDG, HDM) giving the headings during the capture: tcp://HOST:PORT, udp://[HOST]:PORT or serial:/dev/ttyXXX[@BAUD] (default 4800 baud); needs --duration")
}

// given reports whether any live-only flag was set on cmd.
func (f *liveFlags) given(cmd *cobra.Command) []string {
	var names []string
	for _, n := range []string{"rotator", "sweep", "step", "duration", "margin", "record", "gain", "ppm", "iq-latency", "poll-hz", feedFlag} {
		if cmd.Flags().Changed(n) {
			names = append(names, "--"+n)
		}
	}
	return names
}

// addLive lets cmd (bearing, calibrate) take a live receiver
// rtl_tcp://HOST:PORT in place of RECORDING: it records the capture (and
// the rotator's headings) to files, then runs the command's ordinary,
// offline body on them, so a live session and its offline re-run
// (`bearing FILE.sigmf-meta --headings FILE.csv`) give the same result.
// Call it after cmd.RunE is set and the input and heading flags are added.
func addLive(cmd *cobra.Command, in *inputFlags, idf *identFlags, hf *headingFlags) {
	var lf liveFlags
	lf.add(cmd)
	offline := cmd.RunE
	cmd.Use = strings.Replace(cmd.Use, "RECORDING", "RECORDING|rtl_tcp://HOST:PORT", 1)
	cmd.Long += `

Live: give rtl_tcp://HOST:PORT instead of a recording, with --freq (the
channel; the receiver tunes a quarter of --rate below it unless --center is
given), --rate (default 250k) and --gain. With --rotator HOST:PORT (Hamlib
rotctld) and --sweep FROM:TO or --step FROM:STEP:TO:DWELL the antenna is
turned while the receiver records; the capture ends --margin seconds after
the sweep (or at --duration) and is fitted as usual. Without --rotator give
--duration and a heading source (--turn for a steady hand turn, or
--nmea-feed ADDR for a compass that sends NMEA 0183 headings, stamped as
they arrive; --heading-ref picks its HDT or HDM sentences as for --nmea).
--record FILE keeps FILE.sigmf-meta/.sigmf-data and the heading log FILE.csv.`
	cmd.RunE = func(c *cobra.Command, args []string) error {
		if !strings.HasPrefix(strings.ToLower(args[0]), liveScheme) {
			if g := lf.given(c); len(g) > 0 {
				return fmt.Errorf("%s: only for a live receiver (rtl_tcp://HOST:PORT), not a recording", strings.Join(g, ", "))
			}
			return offline(c, args)
		}
		notes := func(s string) { fmt.Fprintln(c.ErrOrStderr(), s) }
		path, cleanup, err := lf.capture(c.Context(), c.Name(), args[0], in, idf, hf, notes)
		if err != nil {
			return err
		}
		defer cleanup()
		return offline(c, []string{path})
	}
}

// liveTuning is the receiver set-up a live capture asks for.
type liveTuning struct {
	addr     string
	cfg      sdr.RTLConfig
	latencyS float64
	// refineClock: the latency is the default guess, so the capture's
	// clock is re-based on the stream origin measured over the capture.
	refineClock bool
	plan        *survey.SweepPlan
}

// parse checks every flag before anything is connected, so a typo does
// not cost a sweep.
func (f *liveFlags) parse(target string, in *inputFlags, idf *identFlags, hf *headingFlags) (liveTuning, error) {
	var t liveTuning
	t.addr = strings.TrimSuffix(target[len(liveScheme):], "/")
	if t.addr == "" {
		return t, fmt.Errorf("%s: want rtl_tcp://HOST:PORT", target)
	}
	if !strings.Contains(t.addr, ":") || strings.HasSuffix(t.addr, "]") {
		t.addr += ":1234" // rtl_tcp's default port (REFERENCES §2)
	}
	if in.format != "" || in.start != "" {
		return t, fmt.Errorf("--format and --start describe a raw recording; a live receiver gives cu8 and its own start time")
	}
	rate, err := parseHz("rate", in.rate)
	if err != nil {
		return t, err
	}
	if rate == 0 {
		rate = 250000
	}
	center, err := parseHz("center", in.center)
	if err != nil {
		return t, err
	}
	freq, err := parseHz("freq", in.freq)
	if err != nil {
		return t, err
	}
	if center == 0 {
		if freq == 0 {
			return t, fmt.Errorf("a live receiver needs --freq (the channel) or --center (the tuning frequency)")
		}
		center = freq - rate/4 // keep the channel off the receiver's DC spike
	}
	if _, _, err := in.config(); err != nil {
		return t, err
	}
	if _, _, err := idf.options(); err != nil {
		return t, err
	}
	if _, err := hf.pattern(); err != nil {
		return t, err
	}
	t.cfg = sdr.RTLConfig{CenterHz: center, SampleRate: rate, PPM: f.ppm}
	switch g := strings.ToLower(strings.TrimSpace(f.gain)); g {
	case "auto", "":
		t.cfg.AutoGain = true
	default:
		v, err := strconv.ParseFloat(g, 64)
		if err != nil || math.IsNaN(v) || v < 0 || v > 60 {
			return t, fmt.Errorf("--gain %q: want auto or a tuner gain in dB (0–60)", f.gain)
		}
		t.cfg.GainDB = v
	}
	switch l := strings.ToLower(strings.TrimSpace(f.latency)); l {
	case "rtl_tcp", "auto":
		t.latencyS = rtlTCPTransferSamples / rate
		t.refineClock = true
	default:
		v, err := strconv.ParseFloat(l, 64)
		if err != nil || !(v >= 0 && v < 10) {
			return t, fmt.Errorf("--iq-latency %q: want rtl_tcp or seconds (0–10)", f.latency)
		}
		t.latencyS = v
	}
	if math.IsNaN(f.duration) || f.duration < 0 || math.IsInf(f.duration, 0) {
		return t, fmt.Errorf("--duration %v: want seconds > 0", f.duration)
	}
	if !(f.margin >= 0 && f.margin <= 600) {
		return t, fmt.Errorf("--margin %v: want seconds from 0 to 600", f.margin)
	}
	if !(f.pollHz > 0 && f.pollHz <= 100) {
		return t, fmt.Errorf("--poll-hz %v: want 0 < Hz ≤ 100", f.pollHz)
	}
	if f.compass != "" {
		return t, f.checkCompass(hf)
	}
	otherHeading := hf.log != "" || hf.nmea != "" || hf.turn != ""
	if f.rotator == "" {
		if f.sweep != "" || f.step != "" {
			return t, fmt.Errorf("--sweep and --step turn a rotator: give --rotator HOST:PORT")
		}
		if f.duration == 0 {
			return t, fmt.Errorf("a live capture without --rotator needs --duration SECONDS")
		}
		if !otherHeading {
			return t, fmt.Errorf("a live capture without --rotator needs a heading source (--turn START:RATE, --headings, --nmea or --nmea-feed ADDR)")
		}
		return t, nil
	}
	if otherHeading {
		return t, fmt.Errorf("--rotator gives the headings: drop --headings, --nmea and --turn")
	}
	plan, err := parseSweep(f.sweep, f.step)
	if err != nil {
		return t, err
	}
	t.plan = &plan
	return t, nil
}

// parseSweep reads --sweep FROM:TO or --step FROM:STEP:TO:DWELL.
func parseSweep(sweep, step string) (survey.SweepPlan, error) {
	var p survey.SweepPlan
	nums := func(flag, s string, n int) ([]float64, error) {
		parts := strings.Split(s, ":")
		if len(parts) != n {
			return nil, fmt.Errorf("%s %q: want %d numbers separated by ':'", flag, s, n)
		}
		v := make([]float64, n)
		for i, q := range parts {
			x, err := strconv.ParseFloat(strings.TrimSpace(q), 64)
			if err != nil || math.IsNaN(x) || math.IsInf(x, 0) {
				return nil, fmt.Errorf("%s %q: %q is not a number", flag, s, q)
			}
			v[i] = x
		}
		return v, nil
	}
	switch {
	case sweep != "" && step != "":
		return p, fmt.Errorf("give --sweep FROM:TO or --step FROM:STEP:TO:DWELL, not both")
	case sweep != "":
		v, err := nums("--sweep", sweep, 2)
		if err != nil {
			return p, err
		}
		p.FromDeg, p.ToDeg = v[0], v[1]
	case step != "":
		v, err := nums("--step", step, 4)
		if err != nil {
			return p, err
		}
		if v[1] == 0 || v[3] < 0 || v[3] > 3600 {
			return p, fmt.Errorf("--step %q: want a non-zero step and a dwell of 0–3600 s", step)
		}
		p.FromDeg, p.StepDeg, p.ToDeg, p.Dwell = v[0], v[1], v[2], time.Duration(v[3]*float64(time.Second))
	default:
		return p, fmt.Errorf("--rotator needs a sweep: --sweep FROM:TO or --step FROM:STEP:TO:DWELL")
	}
	if err := p.Check(); err != nil {
		return p, fmt.Errorf("--sweep/--step: %w", err)
	}
	return p, nil
}

// capture runs a live session and returns the path of the recording for
// the offline body, and a cleanup that removes a temporary recording.
func (f *liveFlags) capture(ctx context.Context, cmdName, target string, in *inputFlags, idf *identFlags, hf *headingFlags, notes func(string)) (string, func(), error) {
	t, err := f.parse(target, in, idf, hf)
	if err != nil {
		return "", nil, err
	}
	base, tmpDir := f.record, ""
	if base == "" {
		if tmpDir, err = os.MkdirTemp("", "nullseek-live-"); err != nil {
			return "", nil, fmt.Errorf("live capture: %w", err)
		}
		base = filepath.Join(tmpDir, "live")
	}
	base = strings.TrimSuffix(strings.TrimSuffix(strings.TrimSuffix(base, ".sigmf-meta"), ".sigmf-data"), ".sigmf")
	cleanup := func() {
		if tmpDir != "" {
			os.RemoveAll(tmpDir)
		}
	}
	path, err := f.run(ctx, cmdName, t, base, hf, notes)
	if err != nil {
		cleanup()
		return "", nil, err
	}
	return path, cleanup, nil
}

// run connects, records and writes the files; on failure nothing is left.
func (f *liveFlags) run(ctx context.Context, cmdName string, t liveTuning, base string, hf *headingFlags, notes func(string)) (string, error) {
	capture := survey.CaptureLive
	if f.compass != "" {
		c, err := f.startCompass(ctx, hf, notes)
		if err != nil {
			return "", err
		}
		defer c.close()
		capture = c.capture
	}
	src, err := sdr.DialRTLTCP(ctx, t.addr, t.cfg)
	if err != nil {
		return "", err
	}
	defer src.Close()
	info := src.Info()
	info.Start = info.Start.Add(-time.Duration(t.latencyS * float64(time.Second)))
	var rot *heading.Rotator
	ref := heading.True
	if strings.HasPrefix(strings.ToLower(hf.ref), "m") {
		ref = heading.Magnetic
	}
	if t.plan != nil {
		// The rotator's own warnings (a failed stop after a lost
		// connection) would repeat the one error line; keep errors only.
		quiet := slog.New(slog.NewTextHandler(os.Stderr, &slog.HandlerOptions{Level: slog.LevelError}))
		rot, err = heading.DialRotator(ctx, f.rotator, heading.RotatorOptions{CaptureStart: info.Start, PollHz: f.pollHz, Ref: ref, Logger: quiet})
		if err != nil {
			return "", err
		}
		defer rot.Close()
	}
	w, err := sdr.CreateSigMF(base, info, "cu8")
	if err != nil {
		return "", err
	}
	w.Meta().Global.Description = "nullseek live capture from " + info.Name
	opts := survey.LiveOptions{Rotator: rot, MaxS: f.duration, MarginS: f.margin, PollHz: f.pollHz, Ref: ref, Sink: w.Write}
	if t.plan != nil {
		opts.Plan = *t.plan
		notes(fmt.Sprintf("recording %s while the rotator at %s sweeps %s", info.Name, f.rotator, planString(*t.plan)))
	} else {
		notes(fmt.Sprintf("recording %s for %.1f s", info.Name, f.duration))
	}
	lc, err := capture(ctx, &startShifted{Source: src, info: info}, opts)
	if err != nil {
		w.Abort()
		return "", err
	}
	for _, warn := range lc.Warnings {
		notes(warn)
	}
	if o := src.StreamOrigin(); t.refineClock && !o.IsZero() {
		// The first-arrival stamp less one transfer was a guess; the origin
		// measured over the whole capture is not (see sdr StreamOrigin).
		// Headings were stamped against the guess: move them with it.
		delta := info.Start.Sub(o).Seconds()
		if lc.Track != nil {
			for i := range lc.Track.Samples {
				lc.Track.Samples[i].T += delta
			}
		}
		w.SetStart(o)
	}
	if n := w.Saturations(); n > 0 {
		notes(fmt.Sprintf("%d sample components were at the receiver's rails (clipping): lower --gain", n))
	}
	if err := w.Close(); err != nil {
		return "", err
	}
	meta := base + ".sigmf-meta"
	removeRec := func() {
		for _, p := range []string{meta, base + ".sigmf-data"} {
			if err := os.Remove(p); err != nil && !errors.Is(err, fs.ErrNotExist) {
				notes(fmt.Sprintf("could not remove %s: %v", p, err))
			}
		}
	}
	if lc.Track != nil {
		csv := base + ".csv"
		if err := atomicfile.WriteFunc(csv, func(w io.Writer) error { return heading.WriteLog(w, lc.Track) }); err != nil {
			removeRec()
			return "", fmt.Errorf("heading log: %w", err)
		}
		hf.log = csv
	}
	secs := float64(lc.Info.Samples) / info.SampleRate
	if f.record != "" {
		rerun := fmt.Sprintf("nullseek %s %s", cmdName, meta)
		if lc.Track != nil {
			rerun += " --headings " + hf.log
		}
		notes(fmt.Sprintf("recorded %.1f s to %s; re-run offline: %s (with the same other flags)", secs, meta, rerun))
	} else {
		notes(fmt.Sprintf("recorded %.1f s", secs))
	}
	return meta, nil
}

// planString describes the plan for messages.
func planString(p survey.SweepPlan) string {
	if p.StepDeg == 0 {
		return fmt.Sprintf("%.1f° → %.1f°", p.FromDeg, p.ToDeg)
	}
	return fmt.Sprintf("%.1f° → %.1f° in %.1f° steps, %v each", p.FromDeg, p.ToDeg, p.StepDeg, p.Dwell)
}

// startShifted is a source whose Info carries a corrected start time.
type startShifted struct {
	sdr.Source
	info sdr.Info
}

func (s *startShifted) Info() sdr.Info { return s.info }
