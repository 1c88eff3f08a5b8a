// Package receiver turns an sdr.Source into events: channel selection, the
// front end, burst detection and per-burst measurement.
package receiver

import "time"

// LevelSample is one reading of channel power.
type LevelSample struct {
	// Sample is the index, at the input sample rate, of the reading's centre.
	Sample int64 `json:"sample"`
	// T is seconds from capture start.
	T float64 `json:"t_s"`
	// LevelDB is channel power in dBFS.
	LevelDB float64 `json:"level_dbfs"`
	// Clipped counts the raw samples at the ADC's rails during the reading.
	Clipped int `json:"clipped,omitempty"`
}

// Burst is one transmission found in the channel.
type Burst struct {
	Index       int       `json:"index"`
	StartSample int64     `json:"start_sample"`
	EndSample   int64     `json:"end_sample"`
	StartS      float64   `json:"start_s"`
	EndS        float64   `json:"end_s"`
	Start       time.Time `json:"-"`
	End         time.Time `json:"-"`
	OffsetHz    float64   `json:"offset_hz"`
	FreqHz      float64   `json:"freq_hz,omitempty"`
	LevelDB     float64   `json:"level_dbfs"`
	PeakDB      float64   `json:"peak_dbfs"`
	NoiseDB     float64   `json:"noise_dbfs"`
	SNRDB       float64   `json:"snr_db"`
	Clipped     float64   `json:"clipped"`
	// CutAtStart and CutAtEnd say the recording began or ended during the
	// burst: its start or end is the recording's, not the transmitter's.
	CutAtStart bool `json:"cut_at_start,omitempty"`
	CutAtEnd   bool `json:"cut_at_end,omitempty"`
	// DoubleCarrier says the carrier frequency stepped inside the burst by
	// more than one transmitter's carrier wanders: two on the air at once.
	// CarrierSpreadHz is the spread of one-second carrier estimates.
	DoubleCarrier   bool    `json:"double_carrier,omitempty"`
	CarrierSpreadHz float64 `json:"carrier_spread_hz"`
	// ChannelRateHz is the sample rate of FMAudio and AMAudio.
	ChannelRateHz float64 `json:"-"`
	// Level is the level track over the burst (≥ 100 readings a second).
	Level []LevelSample `json:"-"`
	// FMAudio is the FM discriminator output (radians per channel sample)
	// and AMAudio the envelope |x|, from AudioStartS, when Config.KeepAudio
	// was set. AudioTruncated says the burst outlasted Config.MaxAudioS.
	FMAudio, AMAudio []float32 `json:"-"`
	AudioStartS      float64   `json:"-"`
	AudioTruncated   bool      `json:"-"`
}
