package sdr

import (
	"fmt"
	"math"
)

// Bounds on the numbers a recording or a receiver may declare. Every
// reader and receiver checks its Info against them (Info.Validate) before
// it delivers a sample, so the stages downstream can size their buffers
// and transforms from Info without guarding against absurd values: a
// lying header is refused with one line naming the value and the bound,
// never discovered later as an out-of-memory, an endless loop or a panic.
const (
	// MinSampleRate is the lowest complex sample rate accepted, in S/s:
	// 1 kS/s holds the narrowest emission nullseek reads, a keyed carrier
	// (A1A, necessary bandwidth 100 Hz at 25 WPM by the ITU-R SM.1138
	// formula Bn = BK), with room to spare, and keeps sample times of any
	// index finite.
	MinSampleRate = 1e3
	// MaxSampleRate is the highest complex sample rate accepted from a
	// recording, in S/s: 100 MS/s. nullseek listens to one narrowband
	// channel on one CPU core; its front end runs at about 100–170 MS/s
	// of CPU time (README, Speed), so a 100 MS/s file is processed at
	// about real time, and the carrier search's FFT at 250 Hz resolution
	// is 2^19 points (tens of MB). Wider captures should be decimated to
	// the band of interest first.
	MaxSampleRate = 100e6
	// MaxCenterHz is the highest RF centre frequency accepted, in Hz:
	// 3000 GHz, the upper end of radio waves (ITU Radio Regulations,
	// Article 1, No. 1.5). A centre frequency is an RF frequency: it is
	// never negative; 0 means unknown.
	MaxCenterHz = 3e12
	// MaxRecordingS is the longest recording accepted, in seconds of
	// samples at its rate: ten years. It is far beyond any real capture
	// (ten years at 1 kS/s of cf64 is 5 TB) and keeps every sample's time
	// inside Go's time.Duration (±292 years), so Info.Start plus a sample
	// index always gives a valid UTC time. Files that claim more (a sparse
	// file, a lying header) are refused.
	MaxRecordingS = 10 * 365.25 * 86400
)

// RTL2832 sample-rate ranges, in S/s, as librtlsdr's rtlsdr_set_sample_rate
// accepts them (osmocom rtl-sdr src/librtlsdr.c: it refuses rates ≤ 225000,
// > 3200000, and those in (300000, 900000] with EINVAL, since its resampler
// cannot make them).
const (
	RTLMinRateLow  = 225001
	RTLMaxRateLow  = 300000
	RTLMinRateHigh = 900001
	RTLMaxRateHigh = 3200000
)

// checkRate accepts a finite sample rate in [MinSampleRate, MaxSampleRate].
func checkRate(hz float64) error {
	if math.IsNaN(hz) || math.IsInf(hz, 0) || hz <= 0 {
		return fmt.Errorf("sample rate %v Hz is not a positive finite number", hz)
	}
	if hz < MinSampleRate || hz > MaxSampleRate {
		return fmt.Errorf("sample rate %v S/s is outside 1 kS/s–100 MS/s: nullseek reads one narrowband channel (decimate wider captures first)", hz)
	}
	return nil
}

// checkCenter accepts 0 (unknown) or an RF frequency in (0, MaxCenterHz].
func checkCenter(hz float64) error {
	if math.IsNaN(hz) || math.IsInf(hz, 0) {
		return fmt.Errorf("centre frequency %v Hz is not a finite number", hz)
	}
	if hz < 0 || hz > MaxCenterHz {
		return fmt.Errorf("centre frequency %v Hz is outside 0–3000 GHz (an RF frequency is not negative; radio waves end at 3000 GHz)", hz)
	}
	return nil
}

// checkLength accepts a sample count whose duration at rate hz is at most
// MaxRecordingS (-1, unknown, passes).
func checkLength(samples int64, hz float64) error {
	if samples < -1 {
		return fmt.Errorf("sample count %d is negative", samples)
	}
	if samples > 0 && float64(samples)/hz > MaxRecordingS {
		return fmt.Errorf("%d samples at %g S/s last %.3g years, more than the 10 years a recording may span: the size or the rate is wrong", samples, hz, float64(samples)/hz/(365.25*86400))
	}
	return nil
}

// Validate checks the numbers of an Info against the package's bounds:
// SampleRate in [MinSampleRate, MaxSampleRate], CenterHz 0 (unknown) or in
// (0, MaxCenterHz], Samples -1 (unknown) or a count lasting at most
// MaxRecordingS, ClipLevel in (0, 1]. Every Source in this package passes
// it; a stage that sizes work from an Info may call it on a Source of
// unknown origin. The error is one line without the source name.
func (i Info) Validate() error {
	if err := checkRate(i.SampleRate); err != nil {
		return err
	}
	if err := checkCenter(i.CenterHz); err != nil {
		return err
	}
	if err := checkLength(i.Samples, i.SampleRate); err != nil {
		return err
	}
	if !(i.ClipLevel > 0 && i.ClipLevel <= 1) {
		return fmt.Errorf("clip level %v is outside (0, 1]", i.ClipLevel)
	}
	return nil
}
