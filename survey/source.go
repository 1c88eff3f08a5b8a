package survey

import (
	"context"
	"fmt"
	"log/slog"
	"math"
	"os"
	"time"

	"nullseek/bearing"
	"nullseek/capture"
	"nullseek/geo"
	"nullseek/heading"
	"nullseek/internal/units"
	"nullseek/receiver"
	"nullseek/sdr"

	"github.com/spf13/pflag"
)

// Input is a recording to survey and how: the file, the raw-file
// parameters it may need (sdr.Open), and the survey's options. When
// HaveChannel is false (neither --freq nor --offset was given) the
// strongest carrier of the recording is scanned, and a note says so.
type Input struct {
	Path        string
	Raw         sdr.RawParams
	Options     Options
	HaveChannel bool
	// Progress, when not nil, makes the progress callback for a stream
	// and the function that ends it (a terminal's progress bar).
	Progress func(sdr.Info) (func(int64), func())
	// Notes receives the lines for the user on the way; nil drops them.
	Notes func(string)
}

// Open opens the recording.
func (in *Input) Open() (sdr.Source, error) { return sdr.Open(in.Path, in.Raw) }

func (in *Input) note(s string) {
	if in.Notes != nil {
		in.Notes(s)
	}
}

// StrongestCarrier finds the carriers of the recording
// (receiver.FindCarriers) and returns the strongest one's offset, with a
// note saying what was picked.
func (in *Input) StrongestCarrier() (offsetHz float64, note string, err error) {
	src, err := in.Open()
	if err != nil {
		return 0, "", err
	}
	defer src.Close()
	cs, err := receiver.FindCarriers(src, receiver.CarrierSearch{})
	if err != nil {
		return 0, "", err
	}
	if len(cs) == 0 {
		return 0, "", fmt.Errorf("%s: no carrier stands 10 dB above the noise; give the channel with --freq or --offset", in.Path)
	}
	info := src.Info()
	c := cs[0]
	where := fmt.Sprintf("offset %+.0f Hz", c.OffsetHz)
	if info.CenterHz != 0 {
		where += fmt.Sprintf(" (%.4f MHz)", (info.CenterHz+c.OffsetHz)/1e6)
	}
	return c.OffsetHz, fmt.Sprintf("no --freq or --offset: %d carrier(s) seen; scanning the strongest at %s, %.0f dB over the floor", len(cs), where, c.SNRDB), nil
}

// Run surveys the recording (Run), on the strongest carrier when no
// channel was given, fitting bearings during the scan when plan is not
// nil (Options.Bearing).
func (in *Input) Run(ctx context.Context, plan *BearingPlan) (*Result, error) {
	opts := in.Options
	opts.Bearing = plan
	if !in.HaveChannel {
		off, msg, err := in.StrongestCarrier()
		if err != nil {
			return nil, err
		}
		in.note(msg)
		opts.Receiver.OffsetHz = off
	}
	src, err := in.Open()
	if err != nil {
		return nil, err
	}
	defer src.Close()
	prog, done := func(int64) {}, func() {}
	if in.Progress != nil {
		prog, done = in.Progress(src.Info())
	}
	res, err := Run(ctx, src, opts, prog)
	done()
	return res, err
}

// InputFlags describe a recording and its channel as the command line
// gives them: the raw-file flags (sdr.RawFlags; needed for a raw file, a
// SigMF or WAV file carries its own), the channel as --freq or --offset
// (units.ParseHz), and the receiver's numeric flags in Receiver
// (defaults: receiver.DefaultConfig).
type InputFlags struct {
	sdr.RawFlags
	Freq, Offset string
	Receiver     receiver.Config
	// ChannelRateGiven and MergeGapGiven say --channel-rate and
	// --merge-gap were given (else 0 refused, and the keying mode's own
	// merge gap).
	ChannelRateGiven, MergeGapGiven bool

	fs *pflag.FlagSet // the flag set Add added the flags to
}

// Raw is the description of a raw recording the flags give
// (sdr.RawFlags.Params).
func (f *InputFlags) Raw() (sdr.RawParams, error) { return f.RawFlags.Params() }

// Config is the checked receiver configuration; haveChannel is false when
// neither --freq nor --offset was given.
func (f *InputFlags) Config() (cfg receiver.Config, haveChannel bool, err error) {
	if f.fs != nil {
		f.ChannelRateGiven, f.MergeGapGiven = f.fs.Changed("channel-rate"), f.fs.Changed("merge-gap")
	}
	// Only the flagged fields: the others stay zero, which means their
	// defaults (receiver.Config).
	r := f.Receiver
	cfg.ChannelRateHz, cfg.FalseAlarmsPerHour, cfg.JoinWaitS = r.ChannelRateHz, r.FalseAlarmsPerHour, r.JoinWaitS
	cfg.MinBurstS, cfg.MergeGapS = r.MinBurstS, r.MergeGapS
	if cfg.FreqHz, err = units.HzFlag("freq", f.Freq); err != nil {
		return cfg, false, err
	}
	if cfg.OffsetHz, err = units.HzFlag("offset", f.Offset); err != nil {
		return cfg, false, err
	}
	if f.Freq != "" && f.Offset != "" {
		return cfg, false, fmt.Errorf("give --freq or --offset, not both")
	}
	if f.ChannelRateGiven {
		if err := units.NonZeroFlag("channel-rate", cfg.ChannelRateHz); err != nil {
			return cfg, false, err // 0 would silently mean the default
		}
	}
	if !f.MergeGapGiven {
		cfg.MergeGapS = 0 // the default for the keying mode (longer for keyed carrier)
	}
	if err := cfg.Validate(); err != nil {
		return cfg, false, err
	}
	return cfg, f.Freq != "" || f.Offset != "", nil
}

// HeadingSource says where the antenna's headings come from and how they
// become a true-north track on a recording's clock: the choices behind
// the heading flags of the bearing and calibrate commands, whose names
// the errors give. Exactly one of LogPath, NMEAPath and Turn is the
// source, unless Live (a live capture's own track) is.
type HeadingSource struct {
	// LogPath is a heading log CSV (--headings; heading.ReadLog).
	LogPath string
	// NMEAPath is a file of NMEA 0183 heading sentences (--nmea;
	// heading.ReadNMEA), paced at NMEARateHz when its sentences are bare
	// (--nmea-rate; 0: not given).
	NMEAPath   string
	NMEARateHz float64
	// Turn is a steady turn (--turn; capture.ParseTurn).
	Turn *heading.SteadyTurn
	// Live is the track a live capture recorded, in place of the above.
	Live *heading.Track
	// Ref is the north the headings are measured from (--heading-ref).
	Ref heading.Ref
	// DeclinationDeg (east positive, within ±180) converts magnetic
	// headings when DeclinationSet (--declination); otherwise WMM2025 at
	// the station and the recording's time gives it.
	DeclinationDeg float64
	DeclinationSet bool
	// StationLat, StationLon is the station's position when HasStation
	// (--station).
	StationLat, StationLon float64
	HasStation             bool
	// StationName names the station in the bearing lines and the bearings
	// CSV ("" : named by its position); StationAltM is its height above
	// the WGS84 ellipsoid, nil when not known.
	StationName string
	StationAltM *float64
	// EstimateLag estimates how late the heading log is from sweeps that
	// turn both ways and applies it (--estimate-lag).
	EstimateLag bool
	// Bearing holds the antenna, fit, site error, mount offset and lag.
	Bearing BearingOptions
	// Logger receives the summary of skipped NMEA lines; slog.Default
	// when nil.
	Logger *slog.Logger

	// declUsed is the declination Track applied to magnetic headings.
	declUsed *float64
}

// Site is where the bearings were taken and the declination that turned
// magnetic headings into true ones (set once Track or Survey has run): what
// the bearing lines and the bearings CSV carry besides the bearings.
func (h *HeadingSource) Site() Site {
	st := Site{Station: h.StationName, DeclinationDeg: h.declUsed}
	if h.HasStation {
		st.Lat, st.Lon, st.HasPosition, st.AltM = h.StationLat, h.StationLon, true, h.StationAltM
	}
	return st
}

// Validate checks every option that can be checked before a recording is
// read, with one error naming the flag: a bad one then costs no scan.
func (h *HeadingSource) Validate() error {
	if err := h.Bearing.Validate(); err != nil {
		return err
	}
	if h.Ref != heading.True && h.Ref != heading.Magnetic {
		return fmt.Errorf("--heading-ref: unknown reference %d", int(h.Ref))
	}
	if h.DeclinationSet && !(h.DeclinationDeg >= -180 && h.DeclinationDeg <= 180) {
		return fmt.Errorf("--declination %v: want degrees east (negative west) within ±180", h.DeclinationDeg)
	}
	if h.HasStation && !(h.StationLat >= -90 && h.StationLat <= 90 && h.StationLon >= -180 && h.StationLon <= 180) {
		return fmt.Errorf("--station %v,%v: want latitude within ±90 and longitude within ±180", h.StationLat, h.StationLon)
	}
	return nil
}

// Pattern validates the options and builds the antenna pattern, checking
// that its mount offset agrees with --mount-offset.
func (h *HeadingSource) Pattern() (bearing.Pattern, error) {
	if err := h.Validate(); err != nil {
		return bearing.Pattern{}, err
	}
	p, err := h.Bearing.Antenna.Pattern()
	if err != nil {
		return bearing.Pattern{}, err
	}
	if _, err := h.Bearing.MountOffset(p); err != nil {
		return bearing.Pattern{}, err
	}
	return p, nil
}

// Track reads the heading source and returns the true-north track, with
// the mount offset and lag applied, over the recording described by info.
// notes receives the lines for the user.
func (h *HeadingSource) Track(info sdr.Info, notes func(string)) (*heading.Track, error) {
	if notes == nil {
		notes = func(string) {}
	}
	pat, err := h.Pattern()
	if err != nil {
		return nil, err
	}
	mount, err := h.Bearing.MountOffset(pat)
	if err != nil {
		return nil, err
	}
	given := 0
	for _, ok := range []bool{h.LogPath != "", h.NMEAPath != "", h.Turn != nil} {
		if ok {
			given++
		}
	}
	if given != 1 && h.Live == nil {
		return nil, fmt.Errorf("give exactly one heading source: --headings FILE, --nmea FILE or --turn START:RATE")
	}
	if h.NMEARateHz != 0 && h.NMEAPath == "" {
		return nil, fmt.Errorf("--nmea-rate paces the sentences of an --nmea FILE: drop it or give --nmea")
	}
	var tr *heading.Track
	switch {
	case h.Live != nil:
		tr = h.Live
	case h.LogPath != "":
		fh, err := os.Open(h.LogPath)
		if err != nil {
			return nil, fmt.Errorf("--headings: %w", err)
		}
		defer fh.Close()
		if tr, err = heading.ReadLog(fh, info.Start, h.Ref); err != nil {
			return nil, fmt.Errorf("--headings %s: %w", h.LogPath, err)
		}
	case h.NMEAPath != "":
		fh, err := os.Open(h.NMEAPath)
		if err != nil {
			return nil, fmt.Errorf("--nmea: %w", err)
		}
		defer fh.Close()
		// Skipped lines are summed up in one warning to h.Logger.
		tr, _, err = heading.ReadNMEA(fh, heading.NMEAFileOptions{Ref: h.Ref, CaptureStart: info.Start, PaceHz: h.NMEARateHz, Name: h.NMEAPath, Logger: h.Logger})
		if err != nil {
			return nil, fmt.Errorf("--nmea: %w", err)
		}
	default:
		dur := 3600.0
		if info.Samples > 0 {
			dur = float64(info.Samples) / info.SampleRate
		}
		if tr, err = capture.TurnTrack(*h.Turn, dur); err != nil {
			return nil, err
		}
	}
	if h.Ref == heading.Magnetic {
		decl, err := h.DeclinationAt(info.Start, notes)
		if err != nil {
			return nil, err
		}
		tr = tr.ToTrue(decl)
		h.declUsed = &decl
	}
	return tr.WithOffset(mount).WithLag(h.Bearing.LagS), nil
}

// DeclinationAt is the declination that converts magnetic headings at
// time t: DeclinationDeg when set, or else the World Magnetic Model
// (WMM2025, geo.Declination) at the station; t zero means today, with a
// note. notes may be nil.
func (h *HeadingSource) DeclinationAt(t time.Time, notes func(string)) (float64, error) {
	if notes == nil {
		notes = func(string) {}
	}
	if h.DeclinationSet {
		return h.DeclinationDeg, nil
	}
	if !h.HasStation {
		return 0, fmt.Errorf("magnetic headings need the declination: give --station LAT,LON (WMM2025) or --declination DEG")
	}
	if t.IsZero() {
		t = time.Now().UTC()
		notes("the recording has no start time: declination computed for today")
	}
	d, warn := geo.Declination(h.StationLat, h.StationLon, 0, t)
	if warn != nil {
		if math.IsNaN(d) { // bad input
			return 0, fmt.Errorf("declination: %w", warn)
		}
		notes("declination: " + warn.Error())
	}
	notes(fmt.Sprintf("magnetic headings converted to true with WMM2025 declination %+.2f°", d))
	return d, nil
}

// Survey surveys the recording in and joins it with the heading source:
// it returns the survey, the track on the recording's clock (with the lag
// estimated and applied when EstimateLag asks for it) and the pattern.
// The heading source is read before the long scan, so that a bad log
// costs no time. With fitDuringScan (and no lag to estimate first) the
// bearings are fitted while the scan goes on (Options.Bearing), so that a
// transmission of any length gets one with bounded memory.
func (h *HeadingSource) Survey(ctx context.Context, in *Input, fitDuringScan bool) (*Result, *heading.Track, bearing.Pattern, error) {
	notes := in.note
	pat, err := h.Pattern()
	if err != nil {
		return nil, nil, pat, err
	}
	src, err := in.Open()
	if err != nil {
		return nil, nil, pat, err
	}
	info := src.Info()
	src.Close()
	tr, err := h.Track(info, notes)
	if err != nil {
		return nil, nil, pat, err
	}
	fo := h.Bearing.Fit
	if h.EstimateLag {
		var turns []float64
		for _, sw := range tr.Sweeps() {
			turns = append(turns, sw.TurnDeg)
		}
		if err := bearing.CheckLagTurns(turns...); err != nil {
			return nil, nil, pat, fmt.Errorf("--estimate-lag: %w (give --lag instead)", err)
		}
	}
	var plan *BearingPlan
	if fitDuringScan && !h.EstimateLag {
		plan = &BearingPlan{Track: tr, Pattern: pat, Fit: fo, WindowS: h.Bearing.WindowS}
	}
	res, err := in.Run(ctx, plan)
	if err != nil {
		return nil, nil, pat, err
	}
	if h.EstimateLag {
		lag, sig, err := EstimateLag(res, tr, pat, fo)
		if err != nil {
			return nil, nil, pat, err
		}
		// lag is what is left on top of --lag; add it.
		notes(fmt.Sprintf("heading log late by %+.3f ± %.3f s (negative: early): applied (give --lag %.3f in later fits)", lag, sig, tr.LagS+lag))
		tr = tr.WithLag(tr.LagS + lag)
	}
	return res, tr, pat, nil
}
