package receiver

import (
	"math"
	"math/cmplx"
	"slices"

	"nullseek/dsp"
)

// preReadings is the least number of readings before the trigger that a
// burst keeps (the pre-roll is usually longer), for the start-edge
// estimate.
const preReadings = 8

// headBefore and headAfter bound the readings around the trigger kept for
// the start edge.
const headBefore, headAfter = 3, 3

// acc sums readings.
type acc struct {
	p    float64
	r1   complex128
	clip int
	n    int
	peak float64
}

func (a *acc) add(r reading) {
	a.p += r.p
	a.r1 += r.r1
	a.clip += r.clip
	a.n++
	a.peak = math.Max(a.peak, r.p)
}

func (a *acc) merge(o acc) {
	a.p += o.p
	a.r1 += o.r1
	a.clip += o.clip
	a.n += o.n
	a.peak = math.Max(a.peak, o.peak)
}

// span is the range of one-second carrier estimates.
type span struct {
	lo, hi float64
	n      int
}

func (s *span) add(f float64) {
	if s.n == 0 {
		s.lo, s.hi = f, f
	}
	s.lo, s.hi = math.Min(s.lo, f), math.Max(s.hi, f)
	s.n++
}

func (s *span) merge(o span) {
	if o.n == 0 {
		return
	}
	s.add(o.lo)
	s.add(o.hi)
	s.n += o.n - 2
}

// burstBuild is what the open burst has gathered: running sums instead of
// its readings, so that its memory does not grow with its length.
//
// The summary covers the readings from the first to the last above the
// off threshold ("first" and "last"); the level, peak and carrier use the
// readings strictly inside (first+1 … last−1). Sums over readings after the
// latest reading above the threshold wait in the *Pend fields and join the
// committed sums when another reading above comes, so that the quiet that
// closes a burst never enters them.
type burstBuild struct {
	index      int
	noise      float64 // linear, the floor the burst is judged against
	cutAtStart bool
	noAudio    bool  // the burst was found after it had ended
	first      int64 // reading numbers
	last       int64
	newest     int64
	in, inPend acc // first+1 … last−1
	out, pend  acc // first … last
	// one-second carrier windows from first+1: committed, waiting, filling
	win, winPend span
	winAcc       acc
	head         [headBefore + 1 + headAfter]reading
	head0, headN int // index in head of the first reading; readings held
	pieces       int
	keep0        int64 // reading number of keep.rd[0]
	// edges, once known: readings and seconds
	startKnown bool
	startIdx   float64
	startS     float64
	endS       float64
}

// detect runs the hysteresis detector on one reading. fm and am are the
// reading's demodulated audio (nil when audio is not kept).
func (s *Scanner) detect(r reading, fm, am []float32) {
	levelDB := dsp.DBFS(r.p)
	if !s.open {
		// The trigger is judged against the floor before this reading, so
		// a burst's first reading never lifts the floor it is judged by.
		if s.pre.n >= 2 && levelDB > s.noiseDB+s.cfg.OnDB {
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
		s.pre.push(r, fm, am)
		return
	}
	r.noise = s.b.noise
	above := levelDB >= dsp.DBFS(r.noise)+s.cfg.OffDB
	s.addReading(r, fm, am, above)
	if above {
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
// readings, restarts the floor from the new level, and reports true. Its
// audio was not kept, so its pieces carry none.
func (s *Scanner) startedInBurst(r reading, levelDB float64) bool {
	if len(s.startup) < 2 || levelDB >= s.noiseDB-s.cfg.OnDB {
		return false
	}
	s.sawQuiet = true
	s.summary.InBurstAtStart = true
	noise := r.p
	s.beginBurst(noise, true, true)
	for i, q := range s.startup {
		q.noise = noise
		if i == 0 {
			s.addFirst(q, nil, nil)
		} else {
			s.addReading(q, nil, nil, true)
		}
	}
	s.startup = nil
	r.noise = noise
	s.addReading(r, nil, nil, false)
	s.nf.Reset()
	s.noiseDB = s.nf.Update(levelDB)
	s.pre.reset()
	s.quietRuns = 1
	return true
}

// beginBurst starts a new burst judged against noise (linear).
func (s *Scanner) beginBurst(noise float64, cutAtStart, noAudio bool) {
	s.open = true
	s.quietRuns = 0
	s.b = burstBuild{index: s.nBursts + 1, noise: noise, cutAtStart: cutAtStart, noAudio: noAudio || !s.cfg.KeepAudio, head0: headBefore}
	s.pc.reset()
	s.keep.reset()
}

func (s *Scanner) openBurst(r reading, fm, am []float32) {
	s.sawQuiet = true
	s.startup = nil
	s.beginBurst(r.noise, false, false)
	b := &s.b
	b.head0 = headBefore - min(s.pre.n, headBefore)
	for i := 0; i < s.pre.n; i++ {
		q, qfm, qam := s.pre.at(i)
		q.noise = r.noise
		s.store(q, qfm, qam)
		if k := s.pre.n - i; k <= headBefore {
			b.head[headBefore-k] = q
		}
	}
	s.pre.reset()
	s.addFirst(r, fm, am)
}

// store puts one reading of the open burst into the piece buffer (emitting
// a piece when it is full) and the kept track.
func (s *Scanner) store(r reading, fm, am []float32) {
	b := &s.b
	audio := !b.noAudio
	if len(s.keep.rd) == 0 {
		b.keep0 = r.idx
	}
	if len(s.keep.rd) < s.keepN {
		s.keep.add(r, fm, am, audio, s.keepN)
	}
	if s.h.Piece != nil {
		s.pc.add(r, fm, am, audio, s.pieceN)
		if len(s.pc.rd) >= s.pieceN {
			s.emitPiece(false)
		}
	}
}

// addFirst adds the reading that opened the burst.
func (s *Scanner) addFirst(r reading, fm, am []float32) {
	b := &s.b
	s.store(r, fm, am)
	b.first, b.last, b.newest = r.idx, r.idx, r.idx
	b.head[headBefore] = r
	b.headN = 1
	b.out.add(r)
	s.hist[int(r.idx%int64(len(s.hist)))] = r
}

// addReading adds a reading after the first; above says it is above the
// off threshold.
func (s *Scanner) addReading(r reading, fm, am []float32, above bool) {
	b := &s.b
	s.store(r, fm, am)
	b.newest = r.idx
	s.hist[int(r.idx%int64(len(s.hist)))] = r
	if b.headN < headAfter+1 {
		b.head[headBefore+b.headN] = r
		b.headN++
	}
	b.pend.add(r)
	if above {
		b.out.merge(b.pend)
		b.pend = acc{}
		b.in.merge(b.inPend)
		b.inPend = acc{}
		b.win.merge(b.winPend)
		b.winPend = span{}
		b.last = r.idx
	}
	b.inPend.add(r)
	// one-second carrier windows over readings at least 10 dB over the
	// noise; a window that ends at or after the last reading above waits
	b.winAcc.add(r)
	if per := max(1, int(1/s.readingS())); b.winAcc.n == per {
		if b.winAcc.p/float64(per) >= 10*b.noise {
			b.winPend.add(cmplx.Phase(b.winAcc.r1) * s.outRate / (2 * math.Pi))
		}
		b.winAcc = acc{}
	}
}

// histAt returns reading idx of the open burst from the history ring.
func (s *Scanner) histAt(idx int64) reading { return s.hist[int(idx%int64(len(s.hist)))] }

// get returns reading i of the open burst (first−headBefore ≤ i ≤ newest,
// and not older than the history ring) from the head or the history.
func (s *Scanner) get(i int64) reading {
	b := &s.b
	if k := int(i - b.first + headBefore); k >= b.head0 && k < headBefore+b.headN {
		return b.head[k]
	}
	return s.histAt(i)
}

// inner is the mean of up to three readings from from, stepping by step,
// inside first … last: the level just inside an edge.
func (s *Scanner) inner(from, step int64) float64 {
	b := &s.b
	var sum float64
	var n int
	for i := from; i >= b.first && i <= b.last && n < 3; i += step {
		sum += s.get(i).p
		n++
	}
	if n == 0 {
		return s.get(from).p
	}
	return sum / float64(n)
}

// fill is the on-fraction of reading i for a step from noise to level.
func (s *Scanner) fill(i int64, level, noise float64) float64 {
	den := level - noise
	if den <= 0 {
		return 0
	}
	f := (s.get(i).p - noise) / den
	return math.Max(0, math.Min(1, f))
}

// startEdge returns the open burst's start edge, seconds from capture
// start (0 for a burst the recording began inside), working it out the
// first time: by area, the on-fraction of each reading summed over a
// window that ends a little after the trigger, whatever the filter smear;
// exact for a step, to a fraction of a reading.
func (s *Scanner) startEdge() float64 {
	b := &s.b
	if b.startKnown {
		return b.startS
	}
	b.startKnown = true
	if b.cutAtStart {
		b.startIdx, b.startS = float64(b.first), 0
		return 0
	}
	first, last := b.first, b.last
	startLevel := s.inner(min(first+1, last), 1)
	w0 := first - int64(headBefore-b.head0)
	w1 := min(last, first+1)
	var on float64
	for i := w0; i <= w1; i++ {
		on += s.fill(i, startLevel, b.noise)
	}
	b.startIdx = float64(w1) + 1 - on // in readings
	b.startS = s.edgeTime(b.startIdx)
	return b.startS
}

// endEdge returns the closing burst's end edge, seconds from capture
// start, by area as for the start.
func (s *Scanner) endEdge(noise float64) float64 {
	b := &s.b
	first, last := b.first, b.last
	s.startEdge()
	endLevel := s.inner(max(last-1, first), -1)
	e0 := max(first, last-1)
	e1 := min(b.newest, last+3)
	var on float64
	for i := e0; i <= e1; i++ {
		on += s.fill(i, endLevel, noise)
	}
	endIdx := float64(e0) + on
	if endIdx <= b.startIdx {
		endIdx = b.startIdx + 1
	}
	return s.edgeTime(endIdx)
}

// closeBurst measures the open burst and hands its last piece and the
// burst to the handler.
func (s *Scanner) closeBurst() {
	b := &s.b
	s.open = false
	s.quietRuns = 0
	first, last := b.first, b.last
	noise := b.noise
	if b.cutAtStart && last+3 <= b.newest {
		// The floor was unknown when this burst began; take it from the
		// quiet readings after its end (the first one or two are edge).
		q := s.sortQ[:0]
		for i := last + 3; i <= b.newest; i++ {
			q = append(q, s.histAt(i).p)
		}
		slices.Sort(q)
		noise = q[len(q)/2]
		s.sortQ = q
	}
	startS := s.startEdge()
	endS := s.endEdge(noise)
	b.endS = endS
	if endS-startS < s.cfg.MinBurstS && b.pieces == 0 {
		return
	}

	// Level and carrier over the readings fully inside the burst; for
	// short bursts fall back to every reading above the threshold.
	lv := b.in
	if last-first < 2 {
		lv = b.out
	}
	mean := lv.p / float64(max(lv.n, 1))
	s.nBursts = b.index
	bu := &Burst{
		Index:           b.index,
		StartSample:     int64(math.Round(startS * s.info.SampleRate)),
		EndSample:       int64(math.Round(endS * s.info.SampleRate)),
		StartS:          startS,
		EndS:            endS,
		Start:           s.timeOf(startS),
		End:             s.timeOf(endS),
		OffsetHz:        s.offsetHz + cmplx.Phase(lv.r1)*s.outRate/(2*math.Pi),
		LevelDB:         dsp.DBFS(mean),
		PeakDB:          dsp.DBFS(lv.peak),
		NoiseDB:         dsp.DBFS(noise),
		Clipped:         float64(b.out.clip) / (float64(last-first+1) * float64(s.chunkIn)),
		ChannelRateHz:   s.outRate,
		CutAtStart:      b.cutAtStart,
		DoubleCarrier:   b.win.n >= 2 && b.win.hi-b.win.lo > doubleCarrierHz,
		CarrierSpreadHz: b.win.hi - b.win.lo,
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
	kept := last-b.keep0 < int64(len(s.keep.rd))
	if kept {
		bu.Level = make([]LevelSample, 0, last-first+1)
		for _, r := range s.keep.rd[first-b.keep0 : last-b.keep0+1] {
			bu.Level = append(bu.Level, s.levelSample(r))
		}
	} else {
		bu.LevelTruncated = true
	}
	if s.cfg.KeepAudio && !b.noAudio {
		if kept {
			// trim the audio to the burst, with 0.1 s either side
			audioStart := b.keep0 * int64(s.readN) // channel-rate index of keep.fm[0]
			a0 := int64(math.Floor((startS-0.1)*s.outRate+s.delayIn/float64(s.dec))) - audioStart
			a1 := int64(math.Ceil((endS+0.1)*s.outRate+s.delayIn/float64(s.dec))) - audioStart
			a0 = max(0, a0)
			a1 = min(int64(len(s.keep.fm)), a1)
			if a1 > a0 {
				// the burst takes the kept audio; the next one starts anew
				bu.FMAudio = s.keep.fm[a0:a1:a1]
				bu.AMAudio = s.keep.am[a0:a1:a1]
				bu.AudioStartS = (float64(audioStart+a0)*float64(s.dec) - s.delayIn) / s.info.SampleRate
				s.keep.fm, s.keep.am = nil, nil
			}
		} else {
			bu.AudioTruncated = true
		}
	}
	if s.h.Piece != nil {
		s.emitPiece(true)
	}
	bu.Pieces = b.pieces
	if s.h.Burst != nil && s.err == nil {
		s.err = s.h.Burst(bu)
	}
}

// doubleCarrierHz is the carrier step inside one burst that marks two
// transmitters on the air at once: far above the few hertz one carrier
// wanders, and below the tens to hundreds of hertz by which cheap crystals
// differ (common practice).
const doubleCarrierHz = 60
