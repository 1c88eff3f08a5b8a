package survey

import (
	"fmt"
	"io"
	"strconv"

	"github.com/spf13/pflag"

	"nullseek/bearing"
	"nullseek/heading"
	"nullseek/ident"
	"nullseek/ident/idmatch"
	"nullseek/ident/morse"
	"nullseek/internal/progress"
	"nullseek/internal/warnlog"
	"nullseek/receiver"
	"nullseek/sdr"
)

// Add adds the recording and receiver flags to fs, their defaults from
// receiver.DefaultConfig; Config then also reads which were given.
func (f *InputFlags) Add(fs *pflag.FlagSet) {
	f.fs, f.Receiver = fs, receiver.DefaultConfig
	r := &f.Receiver
	fs.StringVar(&f.Rate, "rate", "", "sample rate of a raw recording, S/s (k/M suffixes allowed)")
	fs.StringVar(&f.Format, "format", "", "sample format of a raw recording: cu8, ci8, ci16_le, cf32_le")
	fs.StringVar(&f.Center, "center", "", "centre frequency of a raw recording, Hz (k/M/G suffixes and Hz allowed)")
	fs.StringVar(&f.Start, "start", "", "UTC time of a raw recording's first sample (RFC 3339)")
	fs.StringVar(&f.Freq, "freq", "", "channel frequency, Hz (k/M/G suffixes and Hz allowed: 144.525M, 144.525MHz); needs the centre frequency")
	fs.StringVar(&f.Offset, "offset", "", "channel offset from the capture centre, Hz (k suffix allowed); default: the strongest carrier found")
	fs.Float64Var(&r.ChannelRateHz, "channel-rate", r.ChannelRateHz, "target channel sample rate after decimation, S/s")
	fs.Float64Var(&r.FalseAlarmsPerHour, "false-alarms", r.FalseAlarmsPerHour, "bursts per hour that noise alone may start (the detector's design rate; thresholds follow from it)")
	fs.Float64Var(&r.JoinWaitS, "join-wait", r.JoinWaitS, "bursts this close whose timing is Morse keying are joined into one keyed transmission, seconds")
	fs.Float64Var(&r.MinBurstS, "min-burst", r.MinBurstS, "shortest burst kept, seconds")
	fs.Float64Var(&r.MergeGapS, "merge-gap", r.MergeGapS, "drop-outs shorter than this stay inside one burst, seconds")
}

// Turning makes the merge gap of a turning antenna (TurningMergeGapS) the
// default, as if --merge-gap had been given. Call it after Add.
func (f *InputFlags) Turning() {
	_ = f.fs.Set("merge-gap", strconv.FormatFloat(TurningMergeGapS, 'g', -1, 64))
}

// Input is the survey of the recording at path that the flags (and idf's)
// describe; notes and, on a terminal, the progress bar go to stderr.
func (f *InputFlags) Input(path string, idf *IdentFlags, stderr io.Writer) (*Input, error) {
	cfg, have, err := f.Config()
	if err != nil {
		return nil, err
	}
	io, err := idf.Options()
	if err != nil {
		return nil, err
	}
	raw, err := f.Raw()
	if err != nil {
		return nil, err
	}
	return &Input{Path: path, Raw: raw, HaveChannel: have,
		Options:  Options{Receiver: cfg, Ident: io, NoIdent: idf.NoIdent},
		Progress: func(info sdr.Info) (func(int64), func()) { return progress.Bar(stderr, info.Samples, "scanning") },
		Notes:    func(s string) { fmt.Fprintln(stderr, s) }}, nil
}

// IdentFlags select how identifiers are read: --mode (morse.ParseMode),
// --ids (idmatch.LoadList), --no-ident and --min-confidence (default
// idmatch.DefaultMinConfidence).
type IdentFlags struct {
	Mode, IDs     string
	NoIdent       bool
	MinConfidence float64
}

// Add adds the ident flags to fs.
func (f *IdentFlags) Add(fs *pflag.FlagSet) {
	fs.StringVar(&f.Mode, "mode", morse.ModeAuto.String(), "how the identifier is keyed: auto, fm (tone on FM), am (tone on AM, A2A) or cw (keyed carrier)")
	fs.StringVar(&f.IDs, "ids", "", "expected identifiers, comma-separated, or @FILE with one per line")
	fs.BoolVar(&f.NoIdent, "no-ident", false, "skip Morse decoding; report levels and timing only")
	fs.Float64Var(&f.MinConfidence, "min-confidence", idmatch.DefaultMinConfidence, "least confidence (0–1) at which a burst is given a listed identifier; below it: unknown")
}

// Options are the identification options the flags give.
func (f *IdentFlags) Options() (o ident.Options, err error) {
	if o.Mode, err = morse.ParseMode(f.Mode); err != nil {
		return o, err
	}
	o.MinConfidence = f.MinConfidence
	if o.IDs, err = idmatch.LoadList(f.IDs); err != nil {
		return o, fmt.Errorf("--ids: %w", err)
	}
	return o, nil
}

// Add adds the heading and antenna flags to fs, their defaults from
// DefaultHeadingFlags; SourceFor then also reads which were given.
func (f *HeadingFlags) Add(fs *pflag.FlagSet) {
	*f = DefaultHeadingFlags()
	f.fs = fs
	bo := &f.Bearing
	fs.StringVar(&f.Log, "headings", "", "heading log CSV: time (seconds from capture start, or RFC 3339), heading degrees")
	fs.StringVar(&f.NMEA, "nmea", "", "file of NMEA 0183 heading sentences (HDT, HDG, HDM), each line optionally led by its time")
	fs.Float64Var(&f.NMEARateHz, "nmea-rate", 0, "sentence rate of an --nmea file of bare sentences (no times), Hz: the k-th sentence is at k/RATE s")
	fs.StringVar(&f.Turn, "turn", "", "steady turn START:RATE[:T0]: heading START° at T0 s (default 0), turning RATE °/s (negative: anticlockwise)")
	fs.StringVar(&f.Ref, "heading-ref", f.Ref, "the headings' north: true or magnetic")
	fs.Float64Var(&f.DeclinationDeg, "declination", 0, "magnetic declination in degrees east (default: WMM2025 at --station and the recording's time)")
	fs.StringVar(&f.Station, "station", "", "station position LAT,LON in degrees (for WMM declination and for the bearings CSV)")
	fs.Float64Var(&bo.MountOffsetDeg, "mount-offset", bo.MountOffsetDeg, "the antenna's reference direction (see --antenna) minus the heading source's reading, degrees; a pattern file from calibrate carries its own")
	fs.Float64Var(&bo.LagS, "lag", bo.LagS, "the heading log is late by this many seconds: the heading at capture time t is the log's at t + LAG")
	fs.BoolVar(&f.EstimateLag, "estimate-lag", false, "estimate the heading log's lag from sweeps that turn both ways, and apply it")
	fs.StringVar(&bo.Antenna.Kind, "antenna", bo.Antenna.Kind, bearing.AntennaHelp())
	fs.Float64Var(&bo.Antenna.BeamwidthDeg, "beamwidth", bo.Antenna.BeamwidthDeg, "Yagi -3 dB beamwidth, degrees")
	fs.Float64Var(&bo.Antenna.FrontBackDB, "front-back", bo.Antenna.FrontBackDB, "Yagi front-to-back ratio, dB")
	fs.Float64Var(&bo.Antenna.NullDepthDB, "null-depth", bo.Antenna.NullDepthDB, "small-loop null depth, dB")
	fs.Float64Var(&bo.Antenna.BodyDepthDB, "body-depth", bo.Antenna.BodyDepthDB, "body-shield drop, dB")
	fs.Float64Var(&bo.SiteSigmaDeg, "site-sigma", bo.SiteSigmaDeg, "site error added in quadrature to each bearing's sigma, degrees (multipath one site cannot see)")
}

// SourceFor is Source with what the flags added by Add say was given;
// live is a live capture's track or nil. Skipped NMEA lines are warned
// about on stderr.
func (f *HeadingFlags) SourceFor(live *heading.Track, stderr io.Writer) (*HeadingSource, error) {
	if f.fs != nil {
		f.DeclinationSet, f.MountOffsetGiven = f.fs.Changed("declination"), f.fs.Changed("mount-offset")
	}
	return f.Source(live, warnlog.New(stderr, "nullseek"))
}
