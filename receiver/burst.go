// Package receiver turns an sdr.Source into events: channel selection, the
// front end, burst detection and per-burst measurement.
//
// Time convention (every type here): a sample index counts input samples
// (at the recording's sample rate) from the first sample of the capture,
// and a time in seconds is that index over the sample rate. Both are
// corrected for the channel filter's group delay, so they name the moment
// the signal was on the air at the antenna, not when the filter output it.
// UTC times are set only when the recording says when it started.
package receiver

import (
	"cmp"
	"math"
	"slices"
	"time"
)

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
	// KeyUp marks, in a keyed transmission (Burst.Keyed), a reading that
	// is not wholly key-down: in a gap between Morse marks or across a
	// mark's edge. Its level is the noise, or part of the carrier, not the
	// carrier: leave it out of anything that fits the carrier's level.
	// Always false outside keyed transmissions.
	KeyUp bool `json:"key_up,omitempty"`
}

// Burst is one transmission found in the channel, handed over when it has
// ended. Its summary (edges, offset, level, noise, SNR, clipping, flags)
// covers the whole transmission however long; its level track and audio
// are kept only up to Config.MaxKeepS: past that they are nil and
// LevelTruncated / AudioTruncated say so, and the transmission's readings
// and audio are to be had from its pieces (see Piece).
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
	// LevelDB is the mean channel power over the burst, two readings in
	// from each edge (key-down readings only when Keyed), and PeakDB its
	// highest reading, dBFS.
	LevelDB float64 `json:"level_dbfs"`
	PeakDB  float64 `json:"peak_dbfs"`
	// NoiseDB is the noise power the level readings carry over the burst:
	// the noise density found beside the signal (dsp.BandNoise) times the
	// channel filter's noise bandwidth, dBFS. SNRDB is the carrier's power
	// (LevelDB less the noise) over the noise in SNRBandwidthHz (12.5 kHz),
	// so it reads the channel's CNR; −Inf when no carrier is measurable
	// (survey's outputs print that as null).
	NoiseDB float64 `json:"noise_dbfs"`
	SNRDB   float64 `json:"snr_db"`
	// Clipped is the share of raw samples at the ADC's rails.
	Clipped float64 `json:"clipped"`
	// CutAtStart and CutAtEnd say the recording began or ended during the
	// burst: its start or end is the recording's, not the transmitter's.
	CutAtStart bool `json:"cut_at_start,omitempty"`
	CutAtEnd   bool `json:"cut_at_end,omitempty"`
	// DoubleCarrier says the carrier frequency stepped inside the burst by
	// more than one transmitter's carrier wanders: two on the air at once.
	// CarrierSpreadHz is the spread of one-second carrier estimates.
	DoubleCarrier   bool    `json:"double_carrier,omitempty"`
	CarrierSpreadHz float64 `json:"carrier_spread_hz"`
	// Keyed says the transmission is on/off keyed Morse (a keyed carrier,
	// or a carrier keyed by the marks of an MCW identifier), its marks
	// joined into one burst; KeyUnitS is the dot length its key-down
	// intervals fit. Its level, SNR and offset are the key-down readings';
	// its level track marks the others KeyUp.
	Keyed    bool    `json:"keyed,omitempty"`
	KeyUnitS float64 `json:"key_unit_s,omitempty"`
	// Pieces is how many pieces the transmission was delivered in (0 when
	// the scan had no piece handler).
	Pieces int `json:"pieces,omitempty"`
	// ChannelRateHz is the sample rate of FMAudio and AMAudio.
	ChannelRateHz float64 `json:"-"`
	// Level is the level track from the start edge to the end edge
	// (Config.ReadingsPerS readings a second); nil, with LevelTruncated
	// set, when the burst outlasted Config.MaxKeepS.
	Level          []LevelSample `json:"-"`
	LevelTruncated bool          `json:"level_truncated,omitempty"`
	// FMAudio is the FM discriminator output (radians per channel sample)
	// and AMAudio the envelope |x|, from AudioStartS to 0.1 s past the end
	// edge, when Config.KeepAudio was set; nil, with AudioTruncated set,
	// when the burst outlasted Config.MaxKeepS.
	FMAudio, AMAudio []float32 `json:"-"`
	AudioStartS      float64   `json:"-"`
	AudioTruncated   bool      `json:"-"`
}

// Piece is a stretch of a transmission that is still on, handed to
// Handler.Piece while the scan goes on, so that a transmission of any
// length can be identified and fitted with bounded memory.
//
// Pieces of one burst follow each other every Config.PieceS −
// Config.PieceOverlapS seconds; each spans Config.PieceS (the last one
// less) and its first OverlapS seconds repeat the end of the previous
// piece, so anything no longer than the overlap (a Morse identifier at
// slow speed) lies whole inside at least one piece. The first piece starts
// PreRollS before the reading that opened the burst; the last ends where
// the detector closed it (the end edge plus the quiet that confirmed it).
// The last piece of a burst is delivered before the Burst itself.
//
// The Piece and its slices belong to the Scanner and are overwritten after
// Handler.Piece returns: copy what you keep.
type Piece struct {
	// Burst is the Index the closing Burst will carry; Seq counts the
	// burst's pieces from 0; Last marks its final piece.
	Burst int
	Seq   int
	Last  bool
	// Keyed says the burst is a keyed transmission (see Burst.Keyed); its
	// Level then marks key-up readings.
	Keyed bool
	// StartSample and EndSample (input-rate sample indices) and StartS and
	// EndS (seconds) bound the piece: from the start of its first reading
	// to the end of its last. StartS can be negative, by less than the
	// channel filter's delay, for a piece that begins with the recording.
	StartSample, EndSample int64
	StartS, EndS           float64
	// OverlapS is how many seconds at the start repeat the previous piece
	// (0 for the first).
	OverlapS float64
	// OnS and OffS bound the transmission inside the piece: the burst's
	// start edge (its StartS) in the first piece and its end edge (EndS)
	// in the last; the piece's own StartS and EndS otherwise.
	OnS, OffS float64
	// NoiseDB is the mean noise power the piece's readings carry, dBFS
	// (as Burst.NoiseDB).
	NoiseDB float64
	// Level holds every reading of the piece, above the threshold or not.
	Level []LevelSample
	// FMAudio and AMAudio (as in Burst) cover the piece from StartS, one
	// value per channel sample at ChannelRateHz, when Config.KeepAudio was
	// set; nil otherwise, and nil for a burst found only after it had ended
	// (one the recording began inside).
	ChannelRateHz    float64
	FMAudio, AMAudio []float32
}

// Handler receives what a scan finds. Every field may be nil.
type Handler struct {
	// Piece is called with every piece of every burst, in order (see
	// Piece). Without it the scanner assembles no pieces.
	Piece func(*Piece) error
	// Burst is called for every burst as soon as it has ended, after its
	// last piece. The Burst is the handler's to keep.
	Burst func(*Burst) error
	// Progress is called with the number of input samples consumed so
	// far, after every block.
	Progress func(samples int64)
	// Reading is called with every reading the detector keeps for an open
	// burst, in time order, as it is taken: before the piece and the Burst
	// that hold it. A reading may also come twice (a reading that ended a
	// group may open the next), and the readings of an open group run from
	// its pre-roll to the quiet that closed it: the Burst's StartSample and
	// EndSample say which are its own. A logger that must not lose a long
	// transmission's level track keeps them from here, not from pieces,
	// which come only every PieceS − PieceOverlapS seconds.
	Reading func(LevelSample) error
	// Channel is called after every block with the channel's state at its
	// end (see ChannelState): what a live display shows between pieces.
	// Every Burst of a group that has ended was handed over before the
	// first state that says it is no longer Open.
	Channel func(ChannelState) error
}

// ChannelState is the channel as the detector stands after a block.
type ChannelState struct {
	// Samples is the input samples consumed so far (as Progress's).
	Samples int64
	// Open says the detector holds an unfinished burst: it has opened one
	// and not yet handed it over (Handler.Burst comes once the carrier has
	// stayed off long enough to rule out more of a keyed transmission).
	// Carrier says the carrier is up now: a segment of that burst is open
	// (it closes MergeGapS after the carrier goes). Between a keyed
	// transmission's elements, and after its end until the burst is
	// handed over, Open holds without Carrier.
	Open, Carrier bool
	// LevelDB is the mean channel power of the newest reading and NoiseDB
	// the noise power a reading carries, dBFS (as Burst.LevelDB and
	// Burst.NoiseDB), and SNRDB the newest reading's carrier-to-noise
	// ratio as Burst.SNRDB defines it (−Inf when the reading is not above
	// the noise). All three are NaN until the noise estimate is ready (the
	// first warmFrames spectrum frames).
	LevelDB, NoiseDB, SNRDB float64
}

// Between returns the parts of the piece's audio and level track between
// t0 and t1 (seconds from capture start, clamped to the piece): audio
// from the channel sample at or before t0 to the one at or after t1, the
// readings whose centres lie in [t0, t1]. The slices share the piece's
// memory.
func (p *Piece) Between(t0, t1 float64) (fm, am []float32, level []LevelSample) {
	if len(p.FMAudio) > 0 && p.ChannelRateHz > 0 {
		a0 := int(math.Floor((t0 - p.StartS) * p.ChannelRateHz))
		a1 := int(math.Ceil((t1 - p.StartS) * p.ChannelRateHz))
		a0 = max(0, min(a0, len(p.FMAudio)))
		a1 = max(a0, min(a1, len(p.FMAudio)))
		fm, am = p.FMAudio[a0:a1], p.AMAudio[a0:a1]
	}
	i0, _ := slices.BinarySearchFunc(p.Level, t0, func(l LevelSample, t float64) int { return cmp.Compare(l.T, t) })
	i1, found := slices.BinarySearchFunc(p.Level, t1, func(l LevelSample, t float64) int { return cmp.Compare(l.T, t) })
	if found {
		i1++
	}
	if i1 > i0 {
		level = p.Level[i0:i1]
	}
	return fm, am, level
}
