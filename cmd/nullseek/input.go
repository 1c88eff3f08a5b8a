package main

import (
	"fmt"
	"io"
	"os"
	"strconv"
	"time"

	"github.com/schollz/progressbar/v3"
	"github.com/spf13/cobra"
	"github.com/spf13/pflag"
	"golang.org/x/term"

	"nullseek/ident"
	"nullseek/ident/idmatch"
	"nullseek/ident/morse"
	"nullseek/logbook"
	"nullseek/receiver"
	"nullseek/sdr"
	"nullseek/survey"
)

// inputFlags are the flags every command that reads a recording shares.
type inputFlags struct {
	survey.InputFlags
	flags *pflag.FlagSet
}

func (f *inputFlags) add(cmd *cobra.Command) {
	fl := cmd.Flags()
	f.flags, f.Receiver = fl, receiver.DefaultConfig
	fl.StringVar(&f.Rate, "rate", "", "sample rate of a raw recording, S/s (k/M suffixes allowed)")
	fl.StringVar(&f.Format, "format", "", "sample format of a raw recording: cu8, ci8, ci16_le, cf32_le")
	fl.StringVar(&f.Center, "center", "", "centre frequency of a raw recording, Hz (k/M/G suffixes and Hz allowed)")
	fl.StringVar(&f.Start, "start", "", "UTC time of a raw recording's first sample (RFC 3339)")
	fl.StringVar(&f.Freq, "freq", "", "channel frequency, Hz (k/M/G suffixes and Hz allowed: 144.525M, 144.525MHz); needs the centre frequency")
	fl.StringVar(&f.Offset, "offset", "", "channel offset from the capture centre, Hz (k suffix allowed); default: the strongest carrier found")
	fl.Float64Var(&f.Receiver.ChannelRateHz, "channel-rate", f.Receiver.ChannelRateHz, "target channel sample rate after decimation, S/s")
	fl.Float64Var(&f.Receiver.FalseAlarmsPerHour, "false-alarms", f.Receiver.FalseAlarmsPerHour, "bursts per hour that noise alone may start (the detector's design rate; thresholds follow from it)")
	fl.Float64Var(&f.Receiver.JoinWaitS, "join-wait", f.Receiver.JoinWaitS, "bursts this close whose timing is Morse keying are joined into one keyed transmission, seconds")
	fl.Float64Var(&f.Receiver.MinBurstS, "min-burst", f.Receiver.MinBurstS, "shortest burst kept, seconds")
	fl.Float64Var(&f.Receiver.MergeGapS, "merge-gap", f.Receiver.MergeGapS, "drop-outs shorter than this stay inside one burst, seconds")
}

// turning makes the merge gap of a turning antenna the default
// (survey.TurningMergeGapS), as if --merge-gap had been given.
func (f *inputFlags) turning() {
	_ = f.flags.Set("merge-gap", strconv.FormatFloat(survey.TurningMergeGapS, 'g', -1, 64))
}

// config is the receiver configuration the flags give.
func (f *inputFlags) config() (receiver.Config, bool, error) {
	f.ChannelRateGiven, f.MergeGapGiven = f.flags.Changed("channel-rate"), f.flags.Changed("merge-gap")
	return f.Config()
}

// input is the survey of the recording at path that the flags describe;
// notes and the progress bar go to cmd's stderr.
func (f *inputFlags) input(cmd *cobra.Command, path string, idf *identFlags) (*survey.Input, error) {
	cfg, have, err := f.config()
	if err != nil {
		return nil, err
	}
	io, err := idf.options()
	if err != nil {
		return nil, err
	}
	raw, err := f.Raw()
	if err != nil {
		return nil, err
	}
	w := cmd.ErrOrStderr()
	return &survey.Input{Path: path, Raw: raw, HaveChannel: have,
		Options:  survey.Options{Receiver: cfg, Ident: io, NoIdent: idf.noIdent},
		Progress: func(info sdr.Info) (func(int64), func()) { return progress(w, info, "scanning") },
		Notes:    func(s string) { fmt.Fprintln(w, s) }}, nil
}

// identFlags select how identifiers are read.
type identFlags struct {
	mode, ids string
	noIdent   bool
	minConf   float64
}

func (f *identFlags) add(cmd *cobra.Command) {
	cmd.Flags().StringVar(&f.mode, "mode", morse.ModeAuto.String(), "how the identifier is keyed: auto, fm (tone on FM), am (tone on AM, A2A) or cw (keyed carrier)")
	cmd.Flags().StringVar(&f.ids, "ids", "", "expected identifiers, comma-separated, or @FILE with one per line")
	cmd.Flags().BoolVar(&f.noIdent, "no-ident", false, "skip Morse decoding; report levels and timing only")
	cmd.Flags().Float64Var(&f.minConf, "min-confidence", idmatch.DefaultMinConfidence, "least confidence (0–1) at which a burst is given a listed identifier; below it: unknown")
}

func (f *identFlags) options() (o ident.Options, err error) {
	if o.Mode, err = morse.ParseMode(f.mode); err != nil {
		return o, err
	}
	o.MinConfidence = f.minConf
	if o.IDs, err = idmatch.LoadList(f.ids); err != nil {
		return o, fmt.Errorf("--ids: %w", err)
	}
	return o, nil
}

// zeroFlag refuses 0 for flags whose 0 would silently mean "the default".
func zeroFlag(name string, v float64) error {
	if v == 0 {
		return fmt.Errorf("--%s 0: give a positive value", name)
	}
	return nil
}

// terminal is w when it is a terminal, else nil.
func terminal(w io.Writer) *os.File {
	if f, ok := w.(*os.File); ok && term.IsTerminal(int(f.Fd())) {
		return f
	}
	return nil
}

// progress returns a callback that draws a progress bar on w when it is a
// terminal and the stream's length is known; otherwise a no-op.
func progress(w io.Writer, info sdr.Info, label string) (func(int64), func()) {
	tty := terminal(w)
	if info.Samples <= 0 || tty == nil {
		return func(int64) {}, func() {}
	}
	bar := progressbar.NewOptions64(info.Samples,
		progressbar.OptionSetWriter(tty),
		progressbar.OptionSetDescription(label),
		progressbar.OptionShowCount(),
		progressbar.OptionThrottle(100*time.Millisecond),
		progressbar.OptionClearOnFinish(),
	)
	return func(n int64) { _ = bar.Set64(n) }, func() { _ = bar.Finish() }
}

// stationFile adds --station-file and --db (logbook.Flags) to cmd, whose
// RunE then applies the station file first; only as for Flags.Add.
func stationFile(cmd *cobra.Command, f *logbook.Flags, only ...string) {
	f.Add(cmd.Flags(), only...)
	body := cmd.RunE
	cmd.RunE = func(c *cobra.Command, args []string) error {
		if err := f.Apply(len(args)); err != nil {
			return err
		}
		return body(c, args)
	}
}
