package receiver

import (
	"fmt"
	"math"

	"nullseek/sdr"
)

// Config selects the channel and sets the burst detector. Zero values take
// the defaults of DefaultConfig (see Defaults).
type Config struct {
	// FreqHz is the absolute channel frequency. When non-zero it wins over
	// OffsetHz and needs the recording's centre frequency.
	FreqHz float64
	// OffsetHz is the channel's offset from the capture centre (used when
	// FreqHz is zero).
	OffsetHz float64
	// ChannelRateHz is the target channel sample rate (default 48000); the
	// real rate is the input rate over an integer decimation.
	ChannelRateHz float64
	// PassHz and StopHz are the channel filter's passband and stopband
	// edges, one-sided (defaults 7000 and 12000: a 12.5 kHz NBFM channel
	// plus room for a transmitter's crystal error).
	PassHz, StopHz float64
	// ReadingsPerS is the rate of channel-power readings (default 200).
	ReadingsPerS float64
	// FalseAlarmsPerHour is the detector's design rate of bursts started
	// by noise alone (default 0.1 an hour). The thresholds follow from it
	// by the union bound over every window tested (see cfarDesign), so the
	// rate met is lower; raising it lowers the thresholds a little (a
	// factor of ten moves them by about 0.3 standard deviations).
	FalseAlarmsPerHour float64
	// MinBurstS drops bursts shorter than this (default 0.1 s).
	MinBurstS float64
	// MergeGapS bridges drop-outs shorter than this inside one burst
	// (default 0.1 s; raise it for a turning antenna whose nulls drop the
	// level into the noise). The marks of keyed Morse are joined without
	// it (see JoinWaitS).
	MergeGapS float64 // KeyedMergeGapS for keyed carrier (survey)
	// JoinWaitS is how long after a burst ends the detector waits for more
	// before it decides: bursts whose on and off times follow Morse timing
	// (keyed carrier, or a carrier keyed by the marks of an MCW
	// identifier) are joined into one keyed transmission, anything else
	// stays apart (default 1.5 s: a word gap at 5.6 WPM). A keyed
	// transmission ends after a gap of JoinWaitS or ten dots, whichever
	// is longer (at most 3 s).
	JoinWaitS float64
	// NoiseAverageS is the time constant of the averaged spectrum the
	// noise density is estimated from (default 2 s; see dsp.BandNoise).
	NoiseAverageS float64
	// KeepAudio asks for the FM and AM demodulated audio of each burst and
	// piece, for identification.
	KeepAudio bool
	// PieceS is the span of one piece of a transmission (default 20 s) and
	// PieceOverlapS how much of it repeats the previous piece (default 8 s:
	// a Morse identifier of about ten characters at 8 WPM, so one copy
	// straddling a boundary is whole in one piece). See Piece.
	PieceS, PieceOverlapS float64
	// MaxKeepS caps the level track and audio a closing Burst carries
	// (default 60 s: a one-minute turn); longer bursts carry none and are
	// read through their pieces.
	MaxKeepS float64
}

// KeyedMergeGapS is the merge gap of a keyed-carrier (A1A) scan when none
// is given: the word gaps of keyed carrier at 5 WPM stay inside one burst
// (a word gap is 7 dots, ITU-R M.1677-1 part 2, from memory; a dot is
// 1.2/WPM s, PARIS timing, common practice: 1.68 s at 5 WPM).
const KeyedMergeGapS = 2.5

// DefaultConfig holds the receiver's defaults: the one place they live
// (flags and Defaults read them from here).
var DefaultConfig = Config{
	ChannelRateHz:      48000,
	PassHz:             7000,
	StopHz:             12000,
	ReadingsPerS:       200,
	FalseAlarmsPerHour: 0.1,
	MinBurstS:          0.1,
	MergeGapS:          0.1,
	JoinWaitS:          1.5,
	NoiseAverageS:      2,
	PieceS:             20,
	PieceOverlapS:      8,
	MaxKeepS:           60,
}

// SNRBandwidthHz is the noise bandwidth SNRs are quoted in: a 12.5 kHz
// channel, the width the carrier-to-noise ratio of an NBFM channel is
// stated in (common practice). A Burst's SNRDB is its carrier power over
// the noise power in 12.5 kHz; its NoiseDB is the noise power its level
// readings carry, in the channel filter's noise bandwidth
// (Summary.NoiseBandwidthHz, about 17.9 kHz with the default filter).
const SNRBandwidthHz = 12500

// PreRollS is how much of the channel before the reading that opened a
// burst its first piece and its kept audio begin with.
const PreRollS = 0.5

// Defaults returns c with zero fields replaced by DefaultConfig's.
func (c Config) Defaults() Config {
	d := DefaultConfig
	set := func(v *float64, def float64) {
		if *v == 0 {
			*v = def
		}
	}
	set(&c.ChannelRateHz, d.ChannelRateHz)
	set(&c.PassHz, d.PassHz)
	set(&c.StopHz, d.StopHz)
	set(&c.ReadingsPerS, d.ReadingsPerS)
	set(&c.FalseAlarmsPerHour, d.FalseAlarmsPerHour)
	set(&c.MinBurstS, d.MinBurstS)
	set(&c.MergeGapS, d.MergeGapS)
	set(&c.JoinWaitS, d.JoinWaitS)
	set(&c.NoiseAverageS, d.NoiseAverageS)
	set(&c.PieceS, d.PieceS)
	set(&c.PieceOverlapS, d.PieceOverlapS)
	set(&c.MaxKeepS, d.MaxKeepS)
	return c
}

// Validate checks every numeric field (after Defaults) against its
// practical range and names the flag or field that is wrong. NewScanner
// calls it.
func (c Config) Validate() error {
	c = c.Defaults()
	for _, f := range []struct {
		name   string
		v      float64
		lo, hi float64
		unit   string
	}{
		{"--freq (FreqHz)", c.FreqHz, -1e12, 1e12, "Hz"},
		{"--offset (OffsetHz)", c.OffsetHz, -1e10, 1e10, "Hz"},
		{"--channel-rate (ChannelRateHz)", c.ChannelRateHz, 1000, 1e7, "S/s"},
		{"PassHz", c.PassHz, 100, 5e6, "Hz"},
		{"StopHz", c.StopHz, 100, 5e6, "Hz"},
		{"ReadingsPerS", c.ReadingsPerS, 10, 10000, "/s"},
		{"--false-alarms (FalseAlarmsPerHour)", c.FalseAlarmsPerHour, 1e-6, 3600, "per hour"},
		{"--min-burst (MinBurstS)", c.MinBurstS, 0.001, 3600, "s"},
		{"--merge-gap (MergeGapS)", c.MergeGapS, 0.001, 60, "s"},
		{"--join-wait (JoinWaitS)", c.JoinWaitS, 0.001, 10, "s"},
		{"NoiseAverageS", c.NoiseAverageS, 0.1, 60, "s"},
		{"PieceS", c.PieceS, 1, 600, "s"},
		{"PieceOverlapS", c.PieceOverlapS, 0.001, 300, "s"},
		{"MaxKeepS", c.MaxKeepS, 0.001, 3600, "s"},
	} {
		if math.IsNaN(f.v) || math.IsInf(f.v, 0) || f.v < f.lo || f.v > f.hi {
			return fmt.Errorf("receiver: %s is %g %s; it must lie in %g…%g %s", f.name, f.v, f.unit, f.lo, f.hi, f.unit)
		}
	}
	if c.StopHz <= c.PassHz {
		return fmt.Errorf("receiver: StopHz %g must lie above PassHz %g", c.StopHz, c.PassHz)
	}
	if c.PieceOverlapS > c.PieceS/2 {
		return fmt.Errorf("receiver: PieceOverlapS %g s must be at most half of PieceS %g s", c.PieceOverlapS, c.PieceS)
	}
	if c.MinBurstS >= c.PieceS-c.PieceOverlapS {
		return fmt.Errorf("receiver: --min-burst %g s must be shorter than a piece's new part (PieceS − PieceOverlapS = %g s)", c.MinBurstS, c.PieceS-c.PieceOverlapS)
	}
	if c.ReadingsPerS > c.ChannelRateHz/4 {
		return fmt.Errorf("receiver: ReadingsPerS %g needs a channel rate of at least %g S/s (have %g)", c.ReadingsPerS, 4*c.ReadingsPerS, c.ChannelRateHz)
	}
	return nil
}

// ChannelOffset resolves the channel's offset from the capture centre and
// checks that the channel lies inside the captured band.
func (c Config) ChannelOffset(info sdr.Info) (float64, error) {
	c = c.Defaults()
	off := c.OffsetHz
	if c.FreqHz != 0 {
		if info.CenterHz == 0 {
			return 0, fmt.Errorf("--freq needs the recording's centre frequency, which %s does not give: use --offset, or --center for raw files", info.Name)
		}
		off = c.FreqHz - info.CenterHz
	}
	if math.IsNaN(off) || math.IsInf(off, 0) {
		return 0, fmt.Errorf("channel offset %v Hz is not a number", off)
	}
	half := info.SampleRate / 2
	if math.Abs(off)+c.PassHz > half {
		lo, hi := info.CenterHz-half, info.CenterHz+half
		return 0, fmt.Errorf("channel at offset %+.0f Hz (±%.0f Hz wide) is outside the captured band %.0f…%.0f Hz (centre %.0f Hz, rate %.0f S/s)",
			off, c.PassHz, lo, hi, info.CenterHz, info.SampleRate)
	}
	return off, nil
}
