package main

import (
	"fmt"
	"math"
	"os"
	"strconv"
	"strings"
	"time"

	"github.com/schollz/progressbar/v3"
	"github.com/spf13/cobra"
	"github.com/spf13/pflag"
	"golang.org/x/term"

	"nullseek/receiver"
	"nullseek/sdr"
)

// inputFlags are the flags every command that reads a recording shares.
type inputFlags struct {
	rate, format, center, start string
	freq, offset                string
	chanRate                    float64
	falseAlarms, joinWait       float64
	minBurst, mergeGap          float64
	flags                       *pflag.FlagSet
}

func (f *inputFlags) add(cmd *cobra.Command) {
	fl := cmd.Flags()
	f.flags = fl
	fl.StringVar(&f.rate, "rate", "", "sample rate of a raw recording, S/s (k/M suffixes allowed)")
	fl.StringVar(&f.format, "format", "", "sample format of a raw recording: cu8, ci8, ci16_le, cf32_le")
	fl.StringVar(&f.center, "center", "", "centre frequency of a raw recording, Hz (k/M/G suffixes allowed)")
	fl.StringVar(&f.start, "start", "", "UTC time of a raw recording's first sample (RFC 3339)")
	fl.StringVar(&f.freq, "freq", "", "channel frequency, Hz (k/M/G suffixes allowed); needs the centre frequency")
	fl.StringVar(&f.offset, "offset", "", "channel offset from the capture centre, Hz (k suffix allowed); default: the strongest carrier found")
	d := receiver.DefaultConfig
	fl.Float64Var(&f.chanRate, "channel-rate", d.ChannelRateHz, "target channel sample rate after decimation, S/s")
	fl.Float64Var(&f.falseAlarms, "false-alarms", d.FalseAlarmsPerHour, "bursts per hour that noise alone may start (the detector's design rate; thresholds follow from it)")
	fl.Float64Var(&f.joinWait, "join-wait", d.JoinWaitS, "bursts this close whose timing is Morse keying are joined into one keyed transmission, seconds")
	fl.Float64Var(&f.minBurst, "min-burst", d.MinBurstS, "shortest burst kept, seconds")
	fl.Float64Var(&f.mergeGap, "merge-gap", d.MergeGapS, "drop-outs shorter than this stay inside one burst, seconds")
}

// parseHz reads a frequency or rate with an optional k, M or G suffix.
func parseHz(name, s string) (float64, error) {
	if s == "" {
		return 0, nil
	}
	mult := 1.0
	t := strings.TrimSpace(s)
	switch {
	case strings.HasSuffix(t, "k"), strings.HasSuffix(t, "K"):
		mult, t = 1e3, t[:len(t)-1]
	case strings.HasSuffix(t, "M"):
		mult, t = 1e6, t[:len(t)-1]
	case strings.HasSuffix(t, "G"):
		mult, t = 1e9, t[:len(t)-1]
	}
	v, err := strconv.ParseFloat(t, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("--%s %q is not a frequency (examples: 145.5M, 2.4M, -12.5k, 433920000)", name, s)
	}
	return v * mult, nil
}

// open opens the recording named by path with the raw-file flags.
func (f *inputFlags) open(path string) (sdr.Source, error) {
	var p sdr.RawParams
	var err error
	if p.SampleRate, err = parseHz("rate", f.rate); err != nil {
		return nil, err
	}
	if p.CenterHz, err = parseHz("center", f.center); err != nil {
		return nil, err
	}
	p.Format = f.format
	if f.start != "" {
		t, err := time.Parse(time.RFC3339Nano, f.start)
		if err != nil {
			return nil, fmt.Errorf("--start %q is not an RFC 3339 time (example 2026-05-01T10:00:00Z)", f.start)
		}
		p.Start = t.UTC()
	}
	return sdr.Open(path, p)
}

// config builds the receiver configuration; haveChannel is false when
// neither --freq nor --offset was given.
func (f *inputFlags) config() (cfg receiver.Config, haveChannel bool, err error) {
	if cfg.FreqHz, err = parseHz("freq", f.freq); err != nil {
		return cfg, false, err
	}
	if cfg.OffsetHz, err = parseHz("offset", f.offset); err != nil {
		return cfg, false, err
	}
	if f.freq != "" && f.offset != "" {
		return cfg, false, fmt.Errorf("give --freq or --offset, not both")
	}
	if f.flags != nil && f.flags.Changed("channel-rate") {
		if err := zeroFlag("channel-rate", f.chanRate); err != nil {
			return cfg, false, err // 0 would silently mean the default
		}
	}
	cfg.ChannelRateHz = f.chanRate
	cfg.FalseAlarmsPerHour, cfg.JoinWaitS = f.falseAlarms, f.joinWait
	cfg.MinBurstS, cfg.MergeGapS = f.minBurst, f.mergeGap
	if f.flags != nil && !f.flags.Changed("merge-gap") {
		cfg.MergeGapS = 0 // the default for the keying mode (longer for keyed carrier)
	}
	if err := cfg.Validate(); err != nil {
		return cfg, false, err
	}
	return cfg, f.freq != "" || f.offset != "", nil
}

// progress returns a callback that draws a progress bar on stderr when it
// is a terminal and the stream's length is known; otherwise nil.
func progress(info sdr.Info, label string) (func(int64), func()) {
	if info.Samples <= 0 || !term.IsTerminal(int(os.Stderr.Fd())) {
		return nil, func() {}
	}
	bar := progressbar.NewOptions64(info.Samples,
		progressbar.OptionSetWriter(os.Stderr),
		progressbar.OptionSetDescription(label),
		progressbar.OptionShowCount(),
		progressbar.OptionThrottle(100*time.Millisecond),
		progressbar.OptionClearOnFinish(),
	)
	return func(n int64) { _ = bar.Set64(n) }, func() { _ = bar.Finish() }
}
