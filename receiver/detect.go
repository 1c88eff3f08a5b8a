package receiver

import (
	"math"
	"math/cmplx"
	"sort"

	"nullseek/dsp"
)

// preReadings is how many readings before the trigger are kept, for the
// start-edge estimate.
const preReadings = 8

// detect runs the hysteresis detector on one reading. fm and am are the
// reading's demodulated audio (nil when audio is not kept).
func (s *Scanner) detect(r reading, fm, am []float32) {
	levelDB := dsp.DBFS(r.p)
	if s.cur == nil {
		// The trigger is judged against the floor before this reading, so
		// a burst's first reading never lifts the floor it is judged by.
		if len(s.recent) >= 2 && levelDB > s.noiseDB+s.cfg.OnDB {
			r.noise = math.Pow(10, s.noiseDB/10)
			s.openBurst(r, fm, am)
			return
		}
		if !s.sawQuiet && s.startedInBurst(r, levelDB) {
			return
		}
		s.noiseDB = s.nf.Update(levelDB)
		r.noise = math.Pow(10, s.noiseDB/10)
		// For the first minute, keep the readings: if the level later drops
		// well below this floor, they were a transmission the recording
		// began inside. A burst that opens proves the floor was noise.
		if !s.sawQuiet {
			if len(s.startup) < s.maxStartup() {
				s.startup = append(s.startup, r)
			} else {
				s.sawQuiet = true
				s.startup = nil
			}
		}
		s.recent = append(s.recent, r)
		if len(s.recent) > preReadings {
			copy(s.recent, s.recent[1:])
			s.recent = s.recent[:preReadings]
		}
		s.pushRing(fm, am)
		return
	}
	b := s.cur
	r.noise = b.readings[0].noise
	b.readings = append(b.readings, r)
	s.appendAudio(fm, am)
	if levelDB >= dsp.DBFS(r.noise)+s.cfg.OffDB {
		b.lastAbove = len(b.readings) - 1
		s.quietRuns = 0
		return
	}
	s.quietRuns++
	if float64(s.quietRuns)*s.readingS() >= s.cfg.MergeGapS {
		s.closeBurst()
	}
}

func (s *Scanner) readingS() float64 { return float64(s.chunkIn) / s.info.SampleRate }

// maxStartup bounds the readings kept while the floor is not yet known to
// be the noise: a minute of them.
func (s *Scanner) maxStartup() int { return int(60 / s.readingS()) }

// startedInBurst handles a recording that begins inside a transmission:
// the floor first learned is the burst's level, so when the level drops
// well below it the readings so far were a burst cut by the start of the
// recording. It opens that burst (flagged CutAtStart) from the kept
// readings, restarts the floor from the new level, and reports true.
func (s *Scanner) startedInBurst(r reading, levelDB float64) bool {
	if len(s.startup) < 2 || levelDB >= s.noiseDB-s.cfg.OnDB {
		return false
	}
	s.sawQuiet = true
	s.summary.InBurstAtStart = true
	noise := r.p
	b := &burstBuild{cutAtStart: true}
	for _, q := range s.startup {
		q.noise = noise
		b.readings = append(b.readings, q)
	}
	s.startup = nil
	b.firstAbove, b.lastAbove = 0, len(b.readings)-1
	r.noise = noise
	b.readings = append(b.readings, r)
	s.nf.Reset()
	s.noiseDB = s.nf.Update(levelDB)
	s.recent = s.recent[:0]
	s.quietRuns = 1
	s.cur = b
	return true
}

func (s *Scanner) openBurst(r reading, fm, am []float32) {
	s.sawQuiet = true
	s.startup = nil
	noise := r.noise
	b := &burstBuild{}
	for _, q := range s.recent {
		q.noise = noise
		b.readings = append(b.readings, q)
	}
	r.noise = noise
	b.readings = append(b.readings, r)
	b.firstAbove = len(b.readings) - 1
	b.lastAbove = b.firstAbove
	s.recent = s.recent[:0]
	if s.cfg.KeepAudio {
		b.fm, b.am = s.ringAudio()
		// channel-rate index of the first ring sample
		end := (r.idx) * int64(s.readN)
		b.audioStart = end - int64(len(b.fm))
		b.fm = append(b.fm, fm...)
		b.am = append(b.am, am...)
		s.ringPos, s.ringFull = 0, false
	}
	s.quietRuns = 0
	s.cur = b
}

func (s *Scanner) appendAudio(fm, am []float32) {
	b := s.cur
	if !s.cfg.KeepAudio || b.audioFull {
		return
	}
	if float64(len(b.fm)+len(fm)) > s.cfg.MaxAudioS*s.outRate {
		b.audioFull = true
		return
	}
	b.fm = append(b.fm, fm...)
	b.am = append(b.am, am...)
}

// closeBurst measures the open burst and hands it to emit.
func (s *Scanner) closeBurst() {
	b := s.cur
	s.cur = nil
	s.quietRuns = 0
	rd := b.readings
	first, last := b.firstAbove, b.lastAbove
	noise := rd[0].noise
	if b.cutAtStart && last+3 < len(rd) {
		// The floor was unknown when this burst began; take it from the
		// quiet readings after its end (the first one or two are edge).
		var q []float64
		for _, x := range rd[last+3:] {
			q = append(q, x.p)
		}
		sort.Float64s(q)
		noise = q[len(q)/2]
		for i := range rd {
			rd[i].noise = noise
		}
	}

	// Edge levels: the mean of up to three readings fully inside each edge.
	inner := func(from, step int) float64 {
		var sum float64
		var n int
		for i := from; i >= first && i <= last && n < 3; i += step {
			sum += rd[i].p
			n++
		}
		if n == 0 {
			return rd[from].p
		}
		return sum / float64(n)
	}
	// Start edge by area: the on-fraction of each reading summed over a
	// window that ends a little after the trigger, whatever the filter
	// smear; exact for a step, to a fraction of a reading.
	fill := func(i int, level float64) float64 {
		den := level - noise
		if den <= 0 {
			return 0
		}
		f := (rd[i].p - noise) / den
		return math.Max(0, math.Min(1, f))
	}
	startLevel := inner(min(first+1, last), 1)
	w0 := max(0, first-3)
	w1 := min(last, first+1)
	var on float64
	for i := w0; i <= w1; i++ {
		on += fill(i, startLevel)
	}
	startIdx := float64(rd[w1].idx) + 1 - on // in readings
	if b.cutAtStart {
		startIdx = float64(rd[0].idx)
	}
	endLevel := inner(max(last-1, first), -1)
	e0 := max(first, last-1)
	e1 := min(len(rd)-1, last+3)
	on = 0
	for i := e0; i <= e1; i++ {
		on += fill(i, endLevel)
	}
	endIdx := float64(rd[e0].idx) + on
	if endIdx <= startIdx {
		endIdx = startIdx + 1
	}
	toS := func(idx float64) float64 {
		return (idx*float64(s.chunkIn) - s.delayIn) / s.info.SampleRate
	}
	startS, endS := toS(startIdx), toS(endIdx)
	if b.cutAtStart {
		startS = 0
	}
	if endS-startS < s.cfg.MinBurstS {
		return
	}

	// Level and carrier over the readings fully inside the burst; for
	// short bursts fall back to every reading above the threshold.
	lo, hi := first+1, last-1
	if hi < lo {
		lo, hi = first, last
	}
	var psum, peak float64
	var r1 complex128
	var clip int
	for i := lo; i <= hi; i++ {
		psum += rd[i].p
		r1 += rd[i].r1
		peak = math.Max(peak, rd[i].p)
	}
	for i := first; i <= last; i++ {
		clip += rd[i].clip
	}
	mean := psum / float64(hi-lo+1)
	double, spread := s.carrierStep(rd[lo:hi+1], noise)
	s.nBursts++
	bu := &Burst{
		Index:           s.nBursts,
		StartSample:     int64(math.Round(startS * s.info.SampleRate)),
		EndSample:       int64(math.Round(endS * s.info.SampleRate)),
		StartS:          startS,
		EndS:            endS,
		Start:           s.timeOf(startS),
		End:             s.timeOf(endS),
		OffsetHz:        s.offsetHz + cmplx.Phase(r1)*s.outRate/(2*math.Pi),
		LevelDB:         dsp.DBFS(mean),
		PeakDB:          dsp.DBFS(peak),
		NoiseDB:         dsp.DBFS(noise),
		Clipped:         float64(clip) / (float64(last-first+1) * float64(s.chunkIn)),
		ChannelRateHz:   s.outRate,
		CutAtStart:      b.cutAtStart,
		DoubleCarrier:   double,
		CarrierSpreadHz: spread,
		CutAtEnd:        s.atEnd,
	}
	if mean > noise {
		bu.SNRDB = 10 * math.Log10((mean-noise)/noise)
	} else {
		bu.SNRDB = math.Inf(-1)
	}
	if s.info.CenterHz != 0 {
		bu.FreqHz = s.info.CenterHz + bu.OffsetHz
	}
	for i := first; i <= last; i++ {
		t := s.readingTime(float64(rd[i].idx))
		bu.Level = append(bu.Level, LevelSample{
			Sample:  int64(math.Round(t * s.info.SampleRate)),
			T:       t,
			LevelDB: dsp.DBFS(rd[i].p),
			Clipped: rd[i].clip,
		})
	}
	if s.cfg.KeepAudio && len(b.fm) > 0 {
		// trim the audio to the burst, with 0.1 s either side
		a0 := int64(math.Floor((startS-0.1)*s.outRate+s.delayIn/float64(s.dec))) - b.audioStart
		a1 := int64(math.Ceil((endS+0.1)*s.outRate+s.delayIn/float64(s.dec))) - b.audioStart
		a0 = max(0, a0)
		a1 = min(int64(len(b.fm)), a1)
		if a1 > a0 {
			bu.FMAudio = b.fm[a0:a1]
			bu.AMAudio = b.am[a0:a1]
			bu.AudioStartS = (float64(b.audioStart+a0)*float64(s.dec) - s.delayIn) / s.info.SampleRate
			bu.AudioTruncated = b.audioFull
		}
	}
	if s.emit != nil && s.err == nil {
		s.err = s.emit(bu)
	}
}

// doubleCarrierHz is the carrier step inside one burst that marks two
// transmitters on the air at once: far above the few hertz one carrier
// wanders, and below the tens to hundreds of hertz by which cheap crystals
// differ (common practice).
const doubleCarrierHz = 60

// carrierStep measures the carrier frequency over one-second windows of the
// burst's readings (those at least 10 dB over the noise) and reports
// whether it jumps by more than doubleCarrierHz, with the spread found: when
// a second transmitter comes on, FM capture hands the discriminator to the
// stronger carrier and the frequency steps.
func (s *Scanner) carrierStep(rd []reading, noise float64) (bool, float64) {
	per := max(1, int(1/s.readingS()))
	lo, hi := math.Inf(1), math.Inf(-1)
	n := 0
	for i := 0; i+per <= len(rd); i += per {
		var r1 complex128
		var p float64
		for _, x := range rd[i : i+per] {
			r1 += x.r1
			p += x.p
		}
		if p/float64(per) < 10*noise {
			continue
		}
		f := cmplx.Phase(r1) * s.outRate / (2 * math.Pi)
		lo, hi = math.Min(lo, f), math.Max(hi, f)
		n++
	}
	if n < 2 {
		return false, 0
	}
	return hi-lo > doubleCarrierHz, hi - lo
}
