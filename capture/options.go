package capture

import (
	"errors"
	"fmt"
	"math"
	"net"
	"strconv"
	"strings"
	"time"

	"nullseek/heading"
	"nullseek/internal/units"
	"nullseek/sdr"
)

// Options configure Run. Each field's comment names the command-line flag
// it is read from, and Validate's errors name that flag; Defaults gives
// the flags' defaults. Exactly one heading source is used: a rotator
// (Rotator and Plan), a compass (Compass), a steady turn (Turn) or a
// heading file the caller reads itself (HeadingFile).
type Options struct {
	// Receiver is where the IQ comes from (the RECORDING argument,
	// rtl_tcp://HOST:PORT or usb://INDEX; see ParseReceiver).
	Receiver Receiver
	// RateHz is the complex sample rate in Hz (--rate). The receiver
	// checks it against the rates an RTL2832 supports when connecting.
	RateHz float64
	// CenterHz is the tuning frequency in Hz (--center); 0 tunes to
	// FreqHz − RateHz/4, which keeps the channel off the receiver's DC
	// spike.
	CenterHz float64
	// FreqHz is the channel in Hz (--freq), used for the tuning when
	// CenterHz is 0.
	FreqHz float64
	// Gain is the tuner gain (--gain).
	Gain Gain
	// PPM is the receiver's frequency correction in parts per million
	// (--ppm), within ±MaxPPM.
	PPM int
	// Latency is how long the samples take to arrive (--iq-latency).
	Latency Latency
	// DurationS ends the capture after this many seconds of samples
	// (--duration); 0 = no limit, which only a rotator sweep allows (the
	// capture then ends MarginS after the sweep). At most MaxDurationS.
	DurationS float64
	// MarginS is how long the capture goes on after the sweep ends, in
	// seconds (--margin, 0–600), so the sweep's last headings have levels
	// after them.
	MarginS float64
	// PollHz is the rotator position polls per second (--poll-hz, 0–100].
	PollHz float64
	// Rotator is the rotctld HOST:PORT that turns the antenna (--rotator);
	// it needs Plan.
	Rotator string
	// Plan is the rotator's sweep (--sweep or --step; see ParseSweep).
	Plan *SweepPlan
	// Compass is an NMEA 0183 compass giving the headings (--nmea-feed).
	Compass *CompassAddr
	// Turn is a steady turn giving the headings (--turn; see ParseTurn).
	// The capture writes its track as the heading log like any other.
	Turn *heading.SteadyTurn
	// HeadingFile names the flag of a heading file the caller reads itself
	// ("--headings" or "--nmea"); the capture then records no headings.
	HeadingFile string
	// Ref is the north the rotator or compass headings are measured from
	// (--heading-ref). A compass's sentences are picked by it (HDT for
	// true, HDM for magnetic, HDG either way).
	Ref heading.Ref
	// Record is the base path of the recording to keep (--record): BASE.
	// sigmf-meta, BASE.sigmf-data and the heading log BASE.csv. "" records
	// into a temporary folder that Result.Close removes. An existing
	// directory keeps the capture there as rotating SigMF pairs
	// (sdr.RotatingSigMF, a new pair every RecordEvery, 0: 10 minutes),
	// the heading log beside the first, with Geolocation as their
	// core:geolocation; the analysis then reads a temporary copy.
	Record      string
	RecordEvery time.Duration
	Geolocation *sdr.GeoPoint
	// Notes receives one-line messages for the user (connections, what was
	// recorded); nil discards them.
	Notes func(string)
	// Status, when set, is shown the capture's progress a few times a
	// second (see StatusLine).
	Status StatusSink

	// compassSilenceS is CompassOptions.SilenceS (tests shorten it).
	compassSilenceS float64
}

// Bounds on Options, each a practical limit rather than a physical one.
const (
	// MaxDurationS is the longest capture, a day: 250 kS/s of cu8 is 43 GB
	// a day, more than a field laptop keeps.
	MaxDurationS = 86400.0
	// MaxMarginS is the longest margin after a sweep.
	MaxMarginS = 600.0
	// MaxPollHz is the fastest rotator polling: rotctld answers a get_pos
	// in about a millisecond on loopback, but a rotator's controller
	// updates its position a few to tens of times a second.
	MaxPollHz = 100.0
	// MaxGainDB bounds a manual tuner gain; the largest RTL-SDR tuner
	// gains are about 50 dB (R820T table, librtlsdr).
	MaxGainDB = 60.0
	// MaxLatencyS bounds a given receiver latency.
	MaxLatencyS = 10.0
	// MaxPPM bounds the frequency correction: cheap RTL-SDR crystals are
	// within ±100 ppm (common practice), so ±1000 only refuses typos.
	MaxPPM = 1000
)

// Defaults returns the options the flags start from: 250 kS/s (an RTL2832
// rate, librtlsdr), automatic gain, latency measured from the stream, a
// two-second margin after the sweep and the rotator's default poll rate.
func Defaults() Options {
	return Options{
		RateHz:  250000,
		Gain:    Gain{Auto: true},
		Latency: Latency{Auto: true},
		MarginS: 2,
		PollHz:  heading.DefaultPollHz,
	}
}

// tuning returns the centre frequency to tune to.
func (o *Options) tuning() float64 {
	if o.CenterHz != 0 {
		return o.CenterHz
	}
	return TuningHz(o.FreqHz, o.RateHz)
}

// TuningHz is the tuning frequency chosen for a channel at freqHz when none
// is given: a quarter of the sample rate below it, which keeps the channel
// off the receiver's DC spike (an RTL-SDR's LO leakage sits at the centre,
// common practice) and inside the captured band.
func TuningHz(freqHz, rateHz float64) float64 { return freqHz - rateHz/4 }

// Validate checks every field before anything is connected, so that a typo
// does not cost a sweep. Each error is one line naming the flag.
func (o *Options) Validate() error {
	if o.Receiver.Scheme == "" {
		return errors.New("live capture: no receiver: want rtl_tcp://HOST:PORT or usb://INDEX")
	}
	if !finite(o.RateHz) || o.RateHz <= 0 {
		return fmt.Errorf("--rate %v: want a sample rate in S/s above 0", o.RateHz)
	}
	if !finite(o.CenterHz) || o.CenterHz < 0 || !finite(o.FreqHz) || o.FreqHz < 0 {
		return fmt.Errorf("--center %v Hz, --freq %v Hz: want frequencies of 0 Hz or more", o.CenterHz, o.FreqHz)
	}
	if o.CenterHz == 0 && o.FreqHz == 0 {
		return errors.New("a live receiver needs --freq (the channel) or --center (the tuning frequency)")
	}
	if c := o.tuning(); !(c > 0) {
		return fmt.Errorf("--freq %.0f Hz is below a quarter of --rate (the receiver tunes a quarter of the rate below the channel): give --center", o.FreqHz)
	}
	if !o.Gain.Auto && !(o.Gain.DB >= 0 && o.Gain.DB <= MaxGainDB) {
		return fmt.Errorf("--gain %v: want auto or a tuner gain in dB (0–%.0f)", o.Gain.DB, MaxGainDB)
	}
	if o.PPM < -MaxPPM || o.PPM > MaxPPM {
		return fmt.Errorf("--ppm %d: want a correction within ±%d parts per million", o.PPM, MaxPPM)
	}
	if !o.Latency.Auto && !(o.Latency.S >= 0 && o.Latency.S < MaxLatencyS) {
		return fmt.Errorf("--iq-latency %v: want auto or seconds (0–%.0f)", o.Latency.S, MaxLatencyS)
	}
	if !finite(o.DurationS) || o.DurationS < 0 {
		return fmt.Errorf("--duration %v: want seconds > 0", o.DurationS)
	}
	if o.DurationS > MaxDurationS {
		return fmt.Errorf("--duration %v: at most %.0f s (a day) per capture", o.DurationS, MaxDurationS)
	}
	if !(o.MarginS >= 0 && o.MarginS <= MaxMarginS) {
		return fmt.Errorf("--margin %v: want seconds from 0 to %.0f", o.MarginS, MaxMarginS)
	}
	if !(o.PollHz > 0 && o.PollHz <= MaxPollHz) {
		return fmt.Errorf("--poll-hz %v: want 0 < Hz ≤ %.0f", o.PollHz, MaxPollHz)
	}
	if o.Ref != heading.True && o.Ref != heading.Magnetic {
		return fmt.Errorf("--heading-ref: unknown reference %d", int(o.Ref))
	}
	if o.Turn != nil {
		if err := checkTurn(*o.Turn); err != nil {
			return err
		}
	}
	other := o.Turn != nil || o.HeadingFile != ""
	switch {
	case o.Compass != nil:
		if o.Rotator != "" {
			return errors.New("--nmea-feed and --rotator both give the headings: use one")
		}
		if o.Plan != nil {
			return errors.New("--sweep and --step turn a rotator: drop them with --nmea-feed")
		}
		if other {
			return errors.New("--nmea-feed gives the headings: drop --headings, --nmea and --turn")
		}
		if o.DurationS == 0 {
			return errors.New("a live capture with --nmea-feed needs --duration SECONDS")
		}
	case o.Rotator == "":
		if o.Plan != nil {
			return errors.New("--sweep and --step turn a rotator: give --rotator HOST:PORT")
		}
		if o.DurationS == 0 {
			return errors.New("a live capture without --rotator needs --duration SECONDS")
		}
		if !other {
			return errors.New("a live capture without --rotator needs a heading source (--turn START:RATE, --headings, --nmea or --nmea-feed ADDR)")
		}
		if o.Turn != nil && o.HeadingFile != "" {
			return fmt.Errorf("--turn and %s both give the headings: use one", o.HeadingFile)
		}
	default:
		if other {
			return errors.New("--rotator gives the headings: drop --headings, --nmea and --turn")
		}
		if o.Plan == nil {
			return errors.New("--rotator needs a sweep: --sweep FROM:TO or --step FROM:STEP:TO:DWELL")
		}
		if err := o.Plan.Check(); err != nil {
			return fmt.Errorf("--sweep/--step: %w", err)
		}
	}
	return nil
}

// Receiver is a live IQ source.
type Receiver struct {
	// Scheme is "rtl_tcp" or "usb".
	Scheme string
	// Addr is the rtl_tcp server's HOST:PORT.
	Addr string
	// Index is the USB device index (0: the first RTL-SDR found).
	Index int
}

// rtlTCPDefaultPort is rtl_tcp's default port (librtlsdr src/rtl_tcp.c).
const rtlTCPDefaultPort = "1234"

// IsReceiver reports whether s names a live receiver (rtl_tcp:// or
// usb://, any case) rather than a recording.
func IsReceiver(s string) bool {
	l := strings.ToLower(s)
	return strings.HasPrefix(l, "rtl_tcp://") || strings.HasPrefix(l, "usb://")
}

// ParseReceiver reads rtl_tcp://HOST[:PORT] (port 1234 when left out) or
// usb://INDEX (an RTL-SDR on USB; needs a build with the rtlsdr tag).
func ParseReceiver(s string) (Receiver, error) {
	scheme, rest, _ := strings.Cut(s, "://")
	rest = strings.TrimSuffix(rest, "/")
	switch strings.ToLower(scheme) {
	case "rtl_tcp":
		if rest == "" {
			return Receiver{}, fmt.Errorf("%s: want rtl_tcp://HOST:PORT", s)
		}
		if !strings.Contains(rest, ":") || strings.HasSuffix(rest, "]") {
			rest = net.JoinHostPort(strings.Trim(rest, "[]"), rtlTCPDefaultPort)
		}
		host, port, err := net.SplitHostPort(rest)
		if err != nil || host == "" {
			return Receiver{}, fmt.Errorf("%s: want rtl_tcp://HOST:PORT", s)
		}
		if p, err := strconv.Atoi(port); err != nil || p < 1 || p > 65535 {
			return Receiver{}, fmt.Errorf("%s: port must be 1–65535", s)
		}
		return Receiver{Scheme: "rtl_tcp", Addr: net.JoinHostPort(host, port)}, nil
	case "usb":
		i, err := strconv.Atoi(rest)
		if err != nil || i < 0 || i > 255 {
			return Receiver{}, fmt.Errorf("%s: want usb://INDEX, the device's number from 0", s)
		}
		return Receiver{Scheme: "usb", Index: i}, nil
	}
	return Receiver{}, fmt.Errorf("%s: want rtl_tcp://HOST:PORT or usb://INDEX", s)
}

// String is the receiver as given on the command line.
func (r Receiver) String() string {
	if r.Scheme == "usb" {
		return fmt.Sprintf("usb://%d", r.Index)
	}
	return "rtl_tcp://" + r.Addr
}

// Gain is a tuner gain setting.
type Gain struct {
	// Auto selects the tuner's automatic gain.
	Auto bool
	// DB is the manual gain in dB (0–MaxGainDB) when Auto is false.
	DB float64
}

// String is the gain as ParseGain reads it: "auto" or the dB value.
func (g Gain) String() string {
	if g.Auto {
		return "auto"
	}
	return strconv.FormatFloat(g.DB, 'g', -1, 64)
}

// ParseGain reads --gain: "auto" (or empty) or a gain in dB from 0 to
// MaxGainDB.
func ParseGain(s string) (Gain, error) {
	switch g := strings.ToLower(strings.TrimSpace(s)); g {
	case "auto", "":
		return Gain{Auto: true}, nil
	default:
		v, err := strconv.ParseFloat(g, 64)
		if err != nil || !(v >= 0 && v <= MaxGainDB) {
			return Gain{}, fmt.Errorf("--gain %q: want auto or a tuner gain in dB (0–%.0f)", s, MaxGainDB)
		}
		return Gain{DB: v}, nil
	}
}

// Latency is how long the receiver's samples take to reach the capture:
// the time of sample 0 is the arrival of the first samples less the
// latency, and the headings are stamped on that clock.
type Latency struct {
	// Auto measures it from the stream. rtl_tcp hands samples over one
	// transfer at a time (rtl_tcp.c calls rtlsdr_read_async with buf_len 0:
	// 16·32·512 bytes, librtlsdr 0.6), so the first guess is one transfer;
	// after the capture the clock is re-based on the stream origin measured
	// over all of it (sdr.RTLTCP.StreamOrigin). A USB receiver is not
	// corrected (0 s): give S for it.
	Auto bool
	// S is the fixed latency in seconds (0 ≤ S < MaxLatencyS) when Auto is
	// false.
	S float64
}

// ParseLatency reads --iq-latency: "auto" (or empty, or "rtl_tcp", the
// former name) to measure it from the stream, or seconds.
func ParseLatency(s string) (Latency, error) {
	switch l := strings.ToLower(strings.TrimSpace(s)); l {
	case "auto", "", "rtl_tcp":
		return Latency{Auto: true}, nil
	default:
		v, err := strconv.ParseFloat(l, 64)
		if err != nil || !(v >= 0 && v < MaxLatencyS) {
			return Latency{}, fmt.Errorf("--iq-latency %q: want auto (measured from the stream) or seconds (0–%.0f)", s, MaxLatencyS)
		}
		return Latency{S: v}, nil
	}
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// Flags are a live capture's flags as typed; Options.Parse reads them.
type Flags struct {
	// Target is the receiver (ParseReceiver); Rate, Center and Freq are
	// --rate, --center and --freq (units.ParseHz; Rate "" keeps the
	// default); Sweep and Step are --sweep and --step (ParseSweep); Gain,
	// Latency and Compass are --gain, --iq-latency and --nmea-feed.
	Target, Rate, Center, Freq, Sweep, Step, Gain, Latency, Compass string
}

// Parse fills the receiver, tuning, sweep, gain, latency and compass of
// o from the flags' text, with one error naming the flag.
func (o *Options) Parse(f Flags) error {
	var err error
	if o.Receiver, err = ParseReceiver(f.Target); err != nil {
		return err
	}
	if rate, err := units.HzFlag("rate", f.Rate); err != nil {
		return err
	} else if rate != 0 {
		o.RateHz = rate
	}
	if o.CenterHz, err = units.HzFlag("center", f.Center); err != nil {
		return err
	}
	if o.FreqHz, err = units.HzFlag("freq", f.Freq); err != nil {
		return err
	}
	if o.Plan, err = ParseSweep(f.Sweep, f.Step); err != nil {
		return err
	}
	if o.Gain, err = ParseGain(f.Gain); err != nil {
		return err
	}
	if o.Latency, err = ParseLatency(f.Latency); err != nil {
		return err
	}
	if f.Compass != "" {
		if o.Compass, err = ParseCompassAddr(f.Compass); err != nil {
			return err
		}
	}
	return nil
}

// SetHeadings takes the offline heading flags' choice into a live
// capture: a steady turn models the headings; a heading log (--headings)
// or an NMEA file (--nmea) given with a live receiver supplies them
// instead of a live source (HeadingFile names the flag). One file at most.
func (o *Options) SetHeadings(ref heading.Ref, turn *heading.SteadyTurn, logPath, nmeaPath string) error {
	o.Ref, o.Turn = ref, turn
	switch {
	case logPath != "" && nmeaPath != "":
		return fmt.Errorf("give one heading file: --headings or --nmea")
	case turn != nil:
	case logPath != "":
		o.HeadingFile = "--headings"
	case nmeaPath != "":
		o.HeadingFile = "--nmea"
	}
	return nil
}

// DefaultRecordEvery is how much receiver time one SigMF pair of a
// --record directory holds: 10 minutes of cu8 at 2.4 MS/s is 2.9 GB, under
// the 4 GiB a FAT32 card takes in one file.
const DefaultRecordEvery = 10 * time.Minute

// SetStation gives a --record directory's pairs the station's position
// (--station) as core:geolocation when has is set.
func (o *Options) SetStation(has bool, latDeg, lonDeg float64) {
	if has {
		o.Geolocation = &sdr.GeoPoint{Type: "Point", Coordinates: []float64{lonDeg, latDeg}}
	}
}
