package receiver

import (
	"fmt"
	"math"

	"nullseek/sdr"
)

// Config selects the channel and sets the burst detector. Zero values take
// the defaults documented on each field (see Defaults).
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
	// OnDB and OffDB are the hysteresis thresholds above the noise floor
	// that start and end a burst (defaults 5 and 2.5 dB). A 5 ms reading of
	// noise alone scatters by about 0.3 dB, so 5 dB never triggers on noise,
	// while a carrier at 6 dB carrier-to-noise in 12.5 kHz (about 4.4 dB in
	// this channel filter's noise bandwidth) still lifts the power 5.7 dB.
	OnDB, OffDB float64
	// MinBurstS drops bursts shorter than this (default 0.1 s).
	MinBurstS float64
	// MergeGapS bridges drop-outs shorter than this inside one burst
	// (default 0.1 s; raise it for keyed-carrier CW, whose element gaps
	// are real silences, and for a turning antenna whose nulls drop the
	// level under the threshold).
	MergeGapS float64
	// NoiseWindowS is the noise-floor tracker's window (default 20 s).
	NoiseWindowS float64
	// KeepAudio asks for the FM and AM demodulated audio of each burst, for
	// identification. MaxAudioS caps what one burst keeps (default 180 s).
	KeepAudio bool
	MaxAudioS float64
}

// Defaults returns c with zero fields replaced by their defaults.
func (c Config) Defaults() Config {
	set := func(v *float64, d float64) {
		if *v == 0 {
			*v = d
		}
	}
	set(&c.ChannelRateHz, 48000)
	set(&c.PassHz, 7000)
	set(&c.StopHz, 12000)
	set(&c.ReadingsPerS, 200)
	set(&c.OnDB, 5)
	set(&c.OffDB, 2.5)
	set(&c.MinBurstS, 0.1)
	set(&c.MergeGapS, 0.1)
	set(&c.NoiseWindowS, 20)
	set(&c.MaxAudioS, 180)
	return c
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
