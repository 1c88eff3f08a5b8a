package receiver

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"time"

	"nullseek/dsp"
	"nullseek/sdr"
)

// Summary describes a finished scan.
type Summary struct {
	Samples        int64   `json:"samples"`
	DurationS      float64 `json:"duration_s"`
	Bursts         int     `json:"bursts"`
	ClippedSamples int64   `json:"clipped_samples"`
	// NoiseDB is the last noise estimate: the noise power a level reading
	// carries, in NoiseBandwidthHz (the channel filter's noise bandwidth).
	NoiseDB          float64 `json:"noise_dbfs"`
	NoiseBandwidthHz float64 `json:"noise_bandwidth_hz"`
	OffsetHz         float64 `json:"offset_hz"`
	FreqHz           float64 `json:"freq_hz,omitempty"`
	ChannelRateHz    float64 `json:"channel_rate_hz"`
	// InBurstAtStart is true when the recording began inside a
	// transmission: the noise floor could not be seen first, so that
	// first burst is reported from where the floor was found.
	InBurstAtStart bool `json:"in_burst_at_start,omitempty"`
}

// reading is one channel-power reading and what was accumulated with it.
type reading struct {
	idx   int64      // reading number
	p     float64    // mean channel power, linear (full-scale sine = 1)
	r1    complex128 // lag-1 autocorrelation sum (carrier frequency)
	clip  int        // clipped raw samples in the reading's input span
	noise float64    // noise power a reading carries, linear, at its time
	on    bool       // the detector judged the channel occupied
}

// Scanner is the streaming front end and burst detector for one channel.
// Build it with NewScanner and feed it with Scan (or Run).
//
// Memory is bounded whatever the input's length and however long a
// transmission lasts: besides fixed scratch, a Scanner holds at most one
// piece (Config.PieceS), the kept level track and audio of the open burst
// (Config.MaxKeepS) and a few seconds of history. Steady-state processing
// of a reading allocates nothing; the buffers grow to their caps once.
type Scanner struct {
	cfg      Config
	info     sdr.Info
	offsetHz float64

	ch      *dsp.Channelizer
	disc    dsp.FMDiscriminator
	dec     int
	outRate float64
	readN   int // channel samples per reading
	chunkIn int // input samples per reading
	delayIn float64

	// noise: the density beside the signal, and what a reading carries
	bn         *dsp.BandNoise
	enbw       float64 // channel filter noise bandwidth, Hz
	noiseLag1  float64 // a reading's lag-1 sum of noise alone, per unit of its noise power
	noiseLin   float64 // noise power of one reading, linear
	noiseReady bool
	lastP      float64 // the newest reading's power, linear
	cf         cfarDesign
	pw         []float64 // the last len(pw) readings' powers (ring)
	wsum       []float64 // their sums over each detection window
	nRead      int64     // readings seen
	since      int64     // detection windows start at or after this reading

	// scratch, reused block after block
	raw   []byte
	iq    []complex64
	chBuf []complex64
	fm    []float32
	am    []float32
	prev  complex64

	// pre-roll: the readings (and their audio) since the last burst, up to
	// PreRollS
	pre preRoll

	// the open group and its bounded buffers
	open        bool
	g           group
	quiet       int64     // readings judged off since the last one on
	mergeN      int64     // readings of quiet that close a segment
	pc          pieceBuf  // the piece being filled
	keep        pieceBuf  // the group's level and audio up to MaxKeepS
	hist        []reading // ring of the last len(hist) readings
	markScratch []mark
	piece       Piece // handed to Handler.Piece, reused
	levels      []LevelSample
	pieceN      int
	overlapN    int
	keepN       int

	nBursts   int
	clipTotal int64
	atEnd     bool // the stream has ended: an open burst is cut by it
	summary   Summary
	h         Handler
	err       error // first error returned by a handler
}

// NewScanner prepares the front end for a stream described by info. cfg
// is completed with Defaults and checked with Validate.
func NewScanner(info sdr.Info, cfg Config) (*Scanner, error) {
	cfg = cfg.Defaults()
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	if err := info.Validate(); err != nil {
		return nil, fmt.Errorf("%s: %w", info.Name, err)
	}
	off, err := cfg.ChannelOffset(info)
	if err != nil {
		return nil, err
	}
	ch, err := dsp.NewChannelizer(info.SampleRate, off, cfg.ChannelRateHz, cfg.PassHz, cfg.StopHz)
	if err != nil {
		return nil, fmt.Errorf("channel filter: %w", err)
	}
	s := &Scanner{cfg: cfg, info: info, offsetHz: off, ch: ch}
	s.dec = ch.Decimation()
	s.outRate = ch.OutRate()
	s.delayIn = ch.DelayIn()
	s.readN = int(math.Round(s.outRate / cfg.ReadingsPerS))
	if s.readN < 1 {
		s.readN = 1
	}
	s.chunkIn = s.readN * s.dec
	s.disc = dsp.FMDiscriminator{Gain: 1}
	readingsPerS := s.outRate / float64(s.readN)
	// noise: ~47 Hz bins at 48 kS/s; bins where the filter passes at least
	// half the power
	nfft := 1
	for float64(nfft) < s.outRate/50 {
		nfft *= 2
	}
	s.bn, err = dsp.NewBandNoise(s.outRate, nfft, ch.Response, 0.5, cfg.NoiseAverageS)
	if err != nil {
		return nil, fmt.Errorf("noise estimate: %w", err)
	}
	acf := ch.NoiseACF(64)
	s.enbw = acf[0]
	// the filtered noise correlates with itself (real: the filter is
	// symmetric about the channel centre); the carrier estimate takes that
	// part of the lag-1 sum off, or weak carriers read towards the centre
	s.noiseLag1 = float64(s.readN) * acf[1] / acf[0]
	s.cf = newCFAR(acf, s.readN, readingsPerS, cfg.FalseAlarmsPerHour)
	maxW := s.cf.scales[len(s.cf.scales)-1]
	s.pw = make([]float64, maxW+1)
	s.wsum = make([]float64, len(s.cf.scales))
	// Blocks of about 50 ms of input, a whole number of readings.
	per := int(math.Max(1, math.Round(0.05*readingsPerS)))
	s.iq = make([]complex64, per*s.chunkIn)
	s.raw = make([]byte, 2*per*s.chunkIn)
	s.chBuf = make([]complex64, 0, per*s.readN+16)
	s.fm = make([]float32, 0, per*s.readN+16)
	s.am = make([]float32, 0, per*s.readN+16)

	rs := s.readingS()
	warmS := float64(warmFrames*2*nfft) / s.outRate // analysed frames, one in two
	s.pre = newPreRoll(max(8, int(math.Ceil(math.Max(PreRollS, warmS+0.05)/rs))), s.readN, cfg.KeepAudio)
	s.pieceN = max(2, int(math.Round(cfg.PieceS/rs)))
	s.overlapN = min(s.pieceN/2, max(1, int(math.Round(cfg.PieceOverlapS/rs))))
	s.keepN = int(math.Ceil((PreRollS + cfg.MaxKeepS + 0.2) / rs))
	s.mergeN = max(1, int64(math.Ceil(cfg.MergeGapS/rs-1e-9)))
	// the history covers a segment's pre-roll and start, or its end and
	// the quiet that closed it
	s.hist = make([]reading, s.pre.cap()+int(s.mergeN)+4*maxW+64)

	s.summary.OffsetHz = off
	if info.CenterHz != 0 {
		s.summary.FreqHz = info.CenterHz + off
	}
	s.summary.ChannelRateHz = s.outRate
	return s, nil
}

// OffsetHz is the channel's offset from the capture centre.
func (s *Scanner) OffsetHz() float64 { return s.offsetHz }

// ChannelRateHz is the channel sample rate after decimation.
func (s *Scanner) ChannelRateHz() float64 { return s.outRate }

// Run is Scan with a burst callback and a progress callback only (either
// may be nil): no pieces are assembled.
func (s *Scanner) Run(ctx context.Context, src sdr.Source, emit func(*Burst) error, progress func(int64)) (Summary, error) {
	return s.Scan(ctx, src, Handler{Burst: emit, Progress: progress})
}

// Scan reads src to its end (or until ctx is cancelled) and hands what it
// finds to h: the pieces of each transmission while it is on, then the
// burst when it has ended, in time order. A handler's error stops the scan
// and is returned. A Scanner scans one stream once.
func (s *Scanner) Scan(ctx context.Context, src sdr.Source, h Handler) (Summary, error) {
	s.h = h
	cu8, fast := src.(sdr.CU8Reader)
	fast = fast && s.info.Format == "cu8"
	var total int64
	var carry int // samples held in s.iq / s.raw from a short read
	for {
		if err := ctx.Err(); err != nil {
			return s.finish(total, err)
		}
		var n int
		var rerr error
		if fast {
			var nb int
			nb, rerr = cu8.ReadCU8(s.raw[2*carry:])
			n = carry + nb/2
		} else {
			var k int
			k, rerr = src.Read(s.iq[carry:])
			n = carry + k
		}
		whole := n - n%s.chunkIn
		if whole > 0 {
			if fast {
				s.processCU8(s.raw[:2*whole], total)
			} else {
				s.processIQ(s.iq[:whole], total)
			}
			if s.err != nil {
				return s.summary, s.err
			}
			total += int64(whole)
			if h.Progress != nil {
				h.Progress(total)
			}
			if h.Channel != nil {
				if err := h.Channel(s.channelState(total)); err != nil {
					return s.summary, err
				}
			}
		}
		// keep the part of a reading that is not yet whole
		carry = n - whole
		if carry > 0 {
			if fast {
				copy(s.raw, s.raw[2*whole:2*n])
			} else {
				copy(s.iq, s.iq[whole:n])
			}
		}
		if rerr != nil {
			if errors.Is(rerr, io.EOF) {
				total += int64(carry) // a partial reading at the very end is dropped
				return s.finish(total, nil)
			}
			return s.finish(total, rerr)
		}
	}
}

func (s *Scanner) processCU8(raw []byte, first int64) {
	for off := 0; off < len(raw) && s.err == nil; off += 2 * s.chunkIn {
		part := raw[off : off+2*s.chunkIn]
		clip := dsp.CountClippedCU8(part)
		s.chBuf = s.ch.ProcessCU8(s.chBuf[:0], part)
		s.reading(first+int64(off/2), clip)
	}
}

func (s *Scanner) processIQ(iq []complex64, first int64) {
	for off := 0; off < len(iq) && s.err == nil; off += s.chunkIn {
		part := iq[off : off+s.chunkIn]
		clip := dsp.CountClipped(part, s.info.ClipLevel)
		s.chBuf = s.ch.Process(s.chBuf[:0], part)
		s.reading(first+int64(off), clip)
	}
}

// reading turns one reading's channel samples (in s.chBuf) into a reading,
// demodulates audio, and runs the detector.
func (s *Scanner) reading(firstIn int64, clip int) {
	x := s.chBuf
	var p float64
	var r1 complex128
	prev := s.prev
	for _, v := range x {
		re, im := float64(real(v)), float64(imag(v))
		p += re*re + im*im
		r1 += complex128(v) * complex(float64(real(prev)), -float64(imag(prev)))
		prev = v
	}
	if len(x) > 0 {
		p /= float64(len(x))
	}
	var fm, am []float32
	if s.cfg.KeepAudio {
		s.fm = s.disc.Process(s.fm[:0], x)
		s.am = dsp.AMEnvelope(s.am[:0], x)
		fm, am = s.fm, s.am
	}
	s.prev = prev
	s.bn.Add(x)
	if n0, sd, ok := s.bn.Density(); ok {
		s.noiseLin = n0 * s.enbw
		s.cf.setNoiseSD(sd)
		if !s.noiseReady && s.bn.Frames() >= warmFrames {
			s.startNoise()
		}
	}
	idx := firstIn / int64(s.chunkIn)
	s.clipTotal += int64(clip)
	s.detect(reading{idx: idx, p: p, r1: r1, clip: clip}, fm, am)
}

// readingTime is the time in seconds from capture start of the centre of
// reading idx, corrected for the channel filter's delay.
func (s *Scanner) readingTime(idx float64) float64 {
	return ((idx+0.5)*float64(s.chunkIn) - s.delayIn) / s.info.SampleRate
}

// edgeTime is the time of the start of reading idx (fractional readings
// allowed): the time of its first channel sample.
func (s *Scanner) edgeTime(idx float64) float64 {
	return (idx*float64(s.chunkIn) - s.delayIn) / s.info.SampleRate
}

func (s *Scanner) levelSample(r reading) LevelSample {
	t := s.readingTime(float64(r.idx))
	return LevelSample{
		Sample:  int64(math.Round(t * s.info.SampleRate)),
		T:       t,
		LevelDB: dsp.DBFS(r.p),
		Clipped: r.clip,
	}
}

// finish flushes an open burst and completes the summary.
func (s *Scanner) finish(total int64, cause error) (Summary, error) {
	if s.open && s.err == nil {
		s.atEnd = true
		s.finishGroup()
	}
	if s.err != nil && cause == nil {
		cause = s.err
	}
	s.summary.Samples = total
	s.summary.DurationS = float64(total) / s.info.SampleRate
	s.summary.Bursts = s.nBursts
	s.summary.NoiseDB = dsp.DBFS(s.noiseLin)
	s.summary.NoiseBandwidthHz = s.enbw
	s.summary.ClippedSamples = s.clipTotal
	if total == 0 && cause == nil {
		cause = fmt.Errorf("%s: no complete samples to scan", s.info.Name)
	}
	return s.summary, cause
}

// timeOf converts seconds from capture start to UTC when the start is known.
func (s *Scanner) timeOf(sec float64) time.Time {
	if s.info.Start.IsZero() {
		return time.Time{}
	}
	return s.info.Start.Add(time.Duration(math.Round(sec * 1e9)))
}
