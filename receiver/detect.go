package receiver

import (
	"math"
	"math/cmplx"

	"nullseek/dsp"
)

// How bursts are found (the thresholds are cfarDesign's):
//
//  1. Every reading is normalised by the noise a reading carries (the
//     noise density from dsp.BandNoise, estimated beside whatever signal
//     the channel holds, times the channel filter's noise bandwidth).
//  2. A segment starts when a window of 1 … 64 readings ending at the
//     current one exceeds its on-threshold. It stays open while the mean
//     over its own window (the shortest that tells its level from the
//     noise) stays above the off-threshold, and closes after MergeGapS
//     without.
//  3. Its edges are then refined on single readings: the least-squares
//     change point between the noise level and the segment's level (the
//     one that maximises the cumulative sum of readings above the mid
//     level), then the on-fraction of the readings around it, summed.
//  4. Segments within JoinWaitS of each other form a group. When the
//     group's key-down intervals follow Morse timing (morseTiming) it is
//     one keyed transmission; otherwise each segment is a burst of its
//     own. The decision is taken at the latest when the group's first
//     piece is due, so a transmission is never split after pieces of it
//     went out.
//
// Sums over a segment's readings run from its pre-roll on; the readings
// before its start edge and after its end edge are taken off again from
// the history ring, so only a segment's own readings, away from its edges
// by two readings, enter its level, carrier and SNR, and memory does not
// grow with its length.

// acc sums readings.
type acc struct {
	p, noise float64
	r1       complex128
	clip, n  int
}

func (a *acc) add(r reading) {
	a.p += r.p
	a.noise += r.noise
	a.r1 += r.r1
	a.clip += r.clip
	a.n++
}

func (a *acc) merge(o acc) {
	a.p += o.p
	a.noise += o.noise
	a.r1 += o.r1
	a.clip += o.clip
	a.n += o.n
}

func (a acc) minus(o acc) acc {
	return acc{p: a.p - o.p, noise: a.noise - o.noise, r1: a.r1 - o.r1, clip: a.clip - o.clip, n: a.n - o.n}
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
	n := s.n
	s.add(o.lo)
	s.add(o.hi)
	s.n = n + o.n
}

// segment is one stretch of occupied channel.
type segment struct {
	trig, lastOn int64 // the reading that opened it, the last one judged on
	sc           int   // index of its off-test window in cfarDesign.scales
	preStart     int64 // first reading of its pre-roll (and of its sums)
	closeAt      int64 // the reading at which it closed
	startKnown   bool
	startIdx     float64 // refined edges, in readings (fractional)
	endIdx       float64
	a, b         int64 // inner readings: a … b
	cutStart     bool
	cutEnd       bool
	all, kd      acc // running from preStart: all readings; key-down ones
	preAll       acc // over preStart … a−1
	preKD        acc
	in, inKD     acc     // over a … b, once closed
	peak         float64 // highest key-down reading
	win, winPend span    // one-second carrier windows: committed, waiting
	winAcc       acc
}

// group is the open transmission: one or more segments (see above).
type group struct {
	index    int   // Index of the (first) burst it will give
	preStart int64 // first reading stored (keep.rd[0])
	segs     []segment
	cur      segment
	curOpen  bool
	keyed    bool
	decided  bool // no more splitting: keyed, or one burst whose pieces go out
	unitS    float64
	agg      segment // a keyed group's closed segments, summed
	aggN     int
	marks    []mark
	markOn   bool
	markA    int64
	pieces   int
	lastOn   int64
}

// maxGroupSegments and maxGroupMarks bound what an undecided group
// keeps; reaching either forces the decision.
const maxGroupSegments, maxGroupMarks = 1024, 4096

// warmFrames is how many analysed spectrum frames the noise estimate
// needs before the detector starts (about 0.34 s at 48 kS/s; the readings
// before are held in the pre-roll, which is made long enough).
const warmFrames = 8

// detect runs the detector on one reading. fm and am are the reading's
// demodulated audio (nil when audio is not kept).
func (s *Scanner) detect(r reading, fm, am []float32) {
	s.pushPower(r.p)
	s.lastP = r.p
	if !s.noiseReady {
		s.pre.push(r, fm, am)
		return
	}
	r.noise = s.noiseLin
	if !s.open {
		if sc := s.triggerScale(r.idx); sc >= 0 {
			r.on = true
			s.putHist(r)
			s.openGroup(r, fm, am, sc)
			return
		}
		s.putHist(r)
		s.pre.push(r, fm, am)
		return
	}
	s.groupReading(r, fm, am)
}

// snrDB is the carrier-to-noise ratio of a mean channel power over the
// noise it carries (both linear), in SNRBandwidthHz (Burst.SNRDB); −Inf
// when no carrier is measurable (outputs print it as null).
func (s *Scanner) snrDB(mean, noise float64) float64 {
	if !(mean > noise) {
		return math.Inf(-1)
	}
	return 10 * math.Log10((mean-noise)/noise*s.enbw/SNRBandwidthHz)
}

// channelState is the detector's state after total input samples.
func (s *Scanner) channelState(total int64) ChannelState {
	st := ChannelState{Samples: total, Open: s.open, Carrier: s.open && s.g.curOpen, LevelDB: math.NaN(), NoiseDB: math.NaN(), SNRDB: math.NaN()}
	if s.noiseReady {
		st.LevelDB, st.NoiseDB, st.SNRDB = dsp.DBFS(s.lastP), dsp.DBFS(s.noiseLin), s.snrDB(s.lastP, s.noiseLin)
	}
	return st
}

// startNoise is called once the noise estimate is ready: the readings held
// so far get it, and join the history.
func (s *Scanner) startNoise() {
	s.noiseReady = true
	for i := 0; i < s.pre.n; i++ {
		k := (s.pre.pos - s.pre.n + i + len(s.pre.rd)) % len(s.pre.rd)
		s.pre.rd[k].noise = s.noiseLin
		s.putHist(s.pre.rd[k])
	}
}

// pushPower adds a reading's power to the sliding window sums.
func (s *Scanner) pushPower(p float64) {
	n := len(s.pw)
	k := int(s.nRead % int64(n))
	for i, w := range s.cf.scales {
		s.wsum[i] += p - s.pw[(k-w+n)%n]
	}
	s.pw[k] = p
	s.nRead++
	if s.nRead%8192 == 0 { // wash out rounding
		for i, w := range s.cf.scales {
			var t float64
			for j := 0; j < w; j++ {
				t += s.pw[(k-j+n)%n]
			}
			s.wsum[i] = t
		}
	}
}

// windowMean is the mean power of the last scales[sc] readings over the
// noise.
func (s *Scanner) windowMean(sc int) float64 {
	return s.wsum[sc] / float64(s.cf.scales[sc]) / s.noiseLin
}

// triggerScale returns the index of the shortest window ending at reading
// idx that exceeds its on-threshold, among windows that start at or after
// s.since; −1 if none does.
func (s *Scanner) triggerScale(idx int64) int {
	for i, w := range s.cf.scales {
		if idx-int64(w)+1 < s.since {
			break
		}
		if s.windowMean(i) > s.cf.on[i] {
			return i
		}
	}
	return -1
}

func (s *Scanner) putHist(r reading) { s.hist[int(r.idx%int64(len(s.hist)))] = r }

// histAt returns reading idx from the history ring.
func (s *Scanner) histAt(idx int64) reading { return s.hist[int(idx%int64(len(s.hist)))] }

// u is reading i's power in noise units.
func (s *Scanner) u(i int64) float64 {
	r := s.histAt(i)
	return r.p / r.noise
}

// keyDown says reading i was judged on with both neighbours (needs i+1).
func (s *Scanner) keyDown(i int64) bool {
	return s.histAt(i).on && s.histAt(i-1).on && s.histAt(i+1).on
}

func (s *Scanner) readingS() float64 { return float64(s.chunkIn) / s.info.SampleRate }

// openGroup opens a group with the segment triggered by r at scale sc.
func (s *Scanner) openGroup(r reading, fm, am []float32, sc int) {
	s.open = true
	g := &s.g
	*g = group{index: s.nBursts + 1, segs: g.segs[:0], marks: g.marks[:0], preStart: r.idx}
	s.pc.reset()
	s.keep.reset()
	if s.pre.n > 0 {
		q, _, _ := s.pre.at(0)
		g.preStart = q.idx
	}
	for i := 0; i < s.pre.n; i++ {
		q, qfm, qam := s.pre.at(i)
		s.store(q, qfm, qam)
	}
	s.pre.reset()
	s.startSegment(r, sc, g.preStart)
	s.store(r, fm, am)
	s.trackMark(r)
	s.quiet = 0
}

// startSegment makes r, triggered at scale sc, the group's open segment,
// with sums from preStart.
func (s *Scanner) startSegment(r reading, sc int, preStart int64) {
	g := &s.g
	g.cur = segment{trig: r.idx, lastOn: r.idx, sc: sc, preStart: preStart}
	g.curOpen = true
	c := &g.cur
	for i := preStart; i < r.idx; i++ {
		c.all.add(s.histAt(i))
	}
	c.all.add(r)
	g.lastOn = r.idx
}

// store puts one reading of the open group into the kept track and the
// piece buffer (emitting a piece when it is full).
func (s *Scanner) store(r reading, fm, am []float32) {
	if s.h.Reading != nil && s.err == nil {
		s.err = s.h.Reading(s.levelSample(r))
	}
	audio := s.cfg.KeepAudio
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

// trackMark follows the key-down intervals of an undecided group.
func (s *Scanner) trackMark(r reading) {
	g := &s.g
	if g.decided {
		return
	}
	switch {
	case r.on && !g.markOn:
		g.markOn, g.markA = true, r.idx
	case !r.on && g.markOn:
		g.markOn = false
		if len(g.marks) < maxGroupMarks {
			g.marks = append(g.marks, mark{g.markA, r.idx})
		}
	}
}

// groupReading handles a reading while a group is open.
func (s *Scanner) groupReading(r reading, fm, am []float32) {
	g := &s.g
	if g.curOpen {
		r.on = s.windowMean(g.cur.sc) >= s.cf.off[g.cur.sc]
	} else if sc := s.triggerScale(r.idx); sc >= 0 {
		r.on = true
		s.putHist(r)
		s.startSegment(r, sc, max(r.idx-int64(s.pre.cap()), g.lastOn+3))
		s.quiet = 0
	}
	s.putHist(r)
	// the decision is due before the group's first piece would go out
	if !g.decided && (r.idx-g.preStart+2 >= int64(s.pieceN) || len(g.segs) >= maxGroupSegments || len(g.marks) >= maxGroupMarks) {
		if !s.decide() {
			// the group was split and is finished; r, off, waits as
			// pre-roll
			s.pre.push(r, fm, am)
			return
		}
	}
	s.store(r, fm, am)
	s.trackMark(r)
	if !g.curOpen {
		if r.idx-g.lastOn >= s.waitN() {
			s.finishGroup()
		}
		return
	}
	c := &g.cur
	if r.idx != c.trig {
		c.all.add(r)
		// the previous reading's key state is known now
		if q := r.idx - 1; q > c.trig && s.keyDown(q) {
			qr := s.histAt(q)
			c.kd.add(qr)
			c.peak = math.Max(c.peak, qr.p)
		}
		c.winAcc.add(r)
		if per := max(1, int(1/s.readingS())); c.winAcc.n == per {
			if c.winAcc.p >= 10*c.winAcc.noise {
				c.winPend.add(cmplx.Phase(c.winAcc.r1) * s.outRate / (2 * math.Pi))
			}
			c.winAcc = acc{}
		}
	}
	if r.on {
		c.lastOn = r.idx
		g.lastOn = r.idx
		c.win.merge(c.winPend)
		c.winPend = span{}
		s.quiet = 0
	} else {
		s.quiet++
	}
	if !c.startKnown && r.idx >= c.trig+s.startLook(c.trig, c.sc) {
		s.segmentStart(c)
	}
	if s.quiet >= s.mergeN {
		s.closeSegment()
	}
}

// waitN is how many readings after the last one on an open group waits
// for another segment.
func (s *Scanner) waitN() int64 {
	g := &s.g
	w := s.cfg.JoinWaitS
	if g.keyed {
		w = math.Min(3, math.Max(w, 10*g.unitS))
	} else if g.decided {
		w = 0
	}
	return max(1, int64(math.Round(w/s.readingS())))
}

// startLook is how many readings after its trigger a segment's start edge
// is worked out: enough to know its level.
func (s *Scanner) startLook(trig int64, sc int) int64 {
	return int64(max(16, 2*s.cf.scales[sc]) + 4)
}

// segmentStart refines a segment's start edge and takes the readings
// before it off its sums; it also sets the segment's off-test window from
// the level found.
func (s *Scanner) segmentStart(c *segment) {
	c.startKnown = true
	newest := s.nRead - 1
	w0 := c.preStart
	w1 := min(newest, c.trig+s.startLook(c.trig, c.sc))
	// the start lies before the first reading judged off (a gap of keyed
	// Morse): a later mark must not draw the change point to itself
	for i := c.trig + 1; i < w1; i++ {
		if !s.histAt(i).on {
			w1 = i
			break
		}
	}
	lvl := s.levelOver(c.trig+2, w1, w1)
	mid := (1 + lvl) / 2
	// change point: the c maximising Σ_{i=c}^{w1}(u_i − mid)
	best, bestAt, sum := math.Inf(-1), w0, 0.0
	for i := w1; i >= w0; i-- {
		sum += s.u(i) - mid
		if sum > best {
			best, bestAt = sum, i
		}
	}
	c.startIdx = s.refine(bestAt, w0, newest, lvl, true)
	if w0 == 0 && c.startIdx < 0.5 {
		c.cutStart, c.startIdx = true, 0
		s.summary.InBurstAtStart = true
	}
	c.a = int64(math.Ceil(c.startIdx + 2))
	for i := c.preStart; i < c.a && i <= newest; i++ {
		q := s.histAt(i)
		c.preAll.add(q)
		if i > c.trig && i < newest && s.keyDown(i) {
			c.preKD.add(q)
		}
	}
	if lvl > 1 {
		c.sc = s.cf.scaleFor(lvl)
	}
}

// dropTail takes off the end of a closing segment the runs of readings
// judged on that are noise crossing the off-threshold: a run whose mean is
// nearer the noise than the segment's key-down level, after readings
// judged off.
func (s *Scanner) dropTail(c *segment) {
	kd := c.kd.minus(c.preKD)
	if kd.n < 4 || !(kd.noise > 0) {
		return
	}
	mid := (1 + kd.p/kd.noise) / 2
	for k := 0; k < 8; k++ {
		r0 := c.lastOn
		var sum float64
		for r0 > c.trig && s.histAt(r0).on {
			sum += s.u(r0)
			r0--
		}
		if r0 <= c.trig || sum/float64(c.lastOn-r0) >= mid {
			return
		}
		prev := r0
		for prev > c.trig && !s.histAt(prev).on {
			prev--
		}
		if prev <= c.trig || c.lastOn-prev > int64(len(s.hist))/2 {
			return
		}
		c.lastOn = prev
	}
}

// levelOver is the mean of the readings judged on in lo … hi (all of them
// when none is), in noise units; newest bounds what exists.
func (s *Scanner) levelOver(lo, hi, newest int64) float64 {
	hi = min(hi, newest)
	var on, all float64
	var non, nall int
	for i := lo; i <= hi; i++ {
		v := s.u(i)
		all += v
		nall++
		if s.histAt(i).on {
			on += v
			non++
		}
	}
	switch {
	case non > 0:
		return on / float64(non)
	case nall > 0:
		return all / float64(nall)
	}
	return s.u(hi)
}

// refine turns a change point at reading cp (the first on reading for a
// start, the first off reading for an end) into a fractional edge: the
// on-fractions (u − 1)/(lvl − 1) of the readings cp−2 … cp+1, summed (exact
// for a step, whatever the filter smear within those readings). Readings
// outside lo … hi count as noise.
func (s *Scanner) refine(cp, lo, hi int64, lvl float64, start bool) float64 {
	if lvl <= 1 {
		return float64(cp)
	}
	var on float64
	for i := cp - 2; i <= cp+1; i++ {
		if i >= lo && i <= hi {
			on += (s.u(i) - 1) / (lvl - 1)
		}
	}
	var e float64
	if start {
		e = float64(cp+2) - on
	} else {
		e = float64(cp-2) + on
	}
	return math.Max(float64(cp-2), math.Min(float64(cp+2), e))
}

// closeSegment refines the open segment's end edge, finishes its sums and
// hands it to the group.
func (s *Scanner) closeSegment() {
	g := &s.g
	c := &g.cur
	g.curOpen = false
	newest := s.nRead - 1
	if !c.startKnown {
		s.segmentStart(c)
	}
	c.closeAt = newest
	n := int64(s.cf.scales[c.sc])
	s.dropTail(c)
	look := int64(max(16, 2*int(n)))
	w0 := max(int64(math.Ceil(c.startIdx))+1, c.lastOn-n-look)
	// the end lies after the last reading judged off before the last one
	// on (less the off-test's lag): an earlier gap must not draw the
	// change point to itself
	for i := c.lastOn - 1; i > w0; i-- {
		if !s.histAt(i).on {
			w0 = max(w0, i+1-n)
			break
		}
	}
	w1 := newest
	lvl := s.levelOver(w0, c.lastOn-n, newest)
	if c.lastOn-n < w0 {
		lvl = s.levelOver(w0, c.lastOn, newest)
	}
	mid := (1 + lvl) / 2
	// change point: the c maximising Σ_{i=w0}^{c−1}(u_i − mid)
	best, bestAt, sum := 0.0, w0, 0.0
	for i := w0; i <= w1; i++ {
		sum += s.u(i) - mid
		if sum > best {
			best, bestAt = sum, i+1
		}
	}
	c.endIdx = s.refine(bestAt, w0, newest, lvl, false)
	if s.atEnd && c.lastOn+s.mergeN > newest {
		c.cutEnd, c.endIdx = true, float64(newest+1)
	}
	if c.endIdx <= c.startIdx {
		c.endIdx = c.startIdx + 1
	}
	c.b = int64(math.Floor(c.endIdx-2)) - 1
	if c.b >= c.a && c.b >= newest-int64(len(s.hist))+1 {
		var sufAll, sufKD acc
		for i := c.b + 1; i <= newest; i++ {
			q := s.histAt(i)
			sufAll.add(q)
			if i < newest && i > c.trig && s.keyDown(i) {
				sufKD.add(q)
			}
		}
		c.in = c.all.minus(c.preAll).minus(sufAll)
		c.inKD = c.kd.minus(c.preKD).minus(sufKD)
	} else {
		// too short for inner readings: every reading it touches
		c.in, c.inKD = acc{}, acc{}
		lo := max(int64(math.Floor(c.startIdx)), newest-int64(len(s.hist))+1)
		for i := lo; float64(i) < c.endIdx && i <= newest; i++ {
			q := s.histAt(i)
			c.in.add(q)
			if q.on {
				c.inKD.add(q)
				c.peak = math.Max(c.peak, q.p)
			}
		}
	}
	if c.peak == 0 {
		c.peak = c.in.p / float64(max(c.in.n, 1))
	}
	s.since = c.lastOn + 1
	switch {
	case g.keyed:
		s.foldKeyed(*c)
	case g.decided:
		g.segs = append(g.segs[:0], *c)
		s.finishGroup()
	default:
		g.segs = append(g.segs, *c)
		s.testKeying()
		// Morse shows its dots and dashes within a few characters: marks
		// enough to judge and still no Morse timing, then none
		if !g.keyed && len(g.marks) >= 2*keyingMinMarks {
			s.decide()
		}
	}
}

// testKeying decides an undecided group keyed when its marks follow Morse
// timing.
func (s *Scanner) testKeying() {
	g := &s.g
	if g.keyed {
		return
	}
	ms := append(s.markScratch[:0], g.marks...)
	ms = deglitch(ms)
	s.markScratch = ms
	keyed, unit := morseTiming(ms, s.readingS())
	if !keyed {
		return
	}
	g.keyed, g.decided, g.unitS = true, true, unit
	for _, c := range g.segs {
		s.foldKeyed(c)
	}
	g.segs = g.segs[:0]
	g.marks = g.marks[:0]
}

// foldKeyed adds a closed segment to a keyed group's sums.
func (s *Scanner) foldKeyed(c segment) {
	g := &s.g
	a := &g.agg
	if g.aggN == 0 {
		*a = c
		a.win.merge(c.win)
		g.aggN = 1
		return
	}
	a.endIdx, a.b, a.cutEnd, a.lastOn, a.closeAt = c.endIdx, c.b, c.cutEnd, c.lastOn, c.closeAt
	a.in.merge(c.in)
	a.inKD.merge(c.inKD)
	a.peak = math.Max(a.peak, c.peak)
	a.win.merge(c.win)
	g.aggN++
}

// decide settles an undecided group before its first piece: keyed, or not,
// when the segments closed so far become bursts of their own and the open
// one (if any) goes on alone. It reports whether a group is still open.
func (s *Scanner) decide() bool {
	g := &s.g
	s.testKeying()
	if g.keyed {
		return true
	}
	g.decided = true
	g.marks = g.marks[:0]
	for _, c := range g.segs {
		s.emitSegment(c)
	}
	g.segs = g.segs[:0]
	if !g.curOpen {
		s.open = false
		s.pre.reset()
		return false
	}
	// the open segment goes on as the group's only burst, from its own
	// pre-roll
	if from := max(g.cur.preStart, g.preStart); from > g.preStart {
		s.rebase(from)
	}
	g.index = s.nBursts + 1
	return true
}

// rebase drops the kept readings and audio before reading from, and
// refills the piece buffer from what is left.
func (s *Scanner) rebase(from int64) {
	g := &s.g
	k := &s.keep
	drop := int(from - g.preStart)
	if drop > 0 && drop <= len(k.rd) {
		k.rd = k.rd[:copy(k.rd, k.rd[drop:])]
		if len(k.fm) > 0 {
			a := min(drop*s.readN, len(k.fm))
			k.fm = k.fm[:copy(k.fm, k.fm[a:])]
			k.am = k.am[:copy(k.am, k.am[a:])]
		}
	}
	g.preStart = from
	s.pc.reset()
	if s.h.Piece != nil {
		for i, r := range k.rd {
			var fm, am []float32
			if len(k.fm) > 0 {
				fm, am = k.fm[i*s.readN:(i+1)*s.readN], k.am[i*s.readN:(i+1)*s.readN]
			}
			s.pc.add(r, fm, am, s.cfg.KeepAudio, s.pieceN)
		}
	}
}

// finishGroup hands over the open group's burst (or bursts) and closes it.
func (s *Scanner) finishGroup() {
	g := &s.g
	if g.curOpen {
		s.closeSegment() // may finish the group itself
		if !s.open {
			return
		}
	}
	s.open = false
	s.pre.reset()
	s.since = g.lastOn + 1
	switch {
	case g.keyed:
		s.emitGroup(g.agg, true)
	case g.decided:
		if len(g.segs) == 1 {
			s.emitGroup(g.segs[0], false)
		}
	default:
		for _, c := range g.segs {
			s.emitSegment(c)
		}
	}
	g.segs = g.segs[:0]
}

// emitGroup hands over the open group as one burst, with its last piece.
func (s *Scanner) emitGroup(c segment, keyed bool) {
	g := &s.g
	b := s.makeBurst(c, g.index, keyed, g.unitS, true)
	if b == nil && g.pieces == 0 {
		return
	}
	if b == nil { // pieces went out: the burst must follow them
		b = s.forceBurst(c, g.index, keyed, g.unitS, true)
	}
	s.nBursts = g.index
	if s.h.Piece != nil {
		s.emitPiece(true, b.StartS, b.EndS)
	}
	b.Pieces = g.pieces
	if s.h.Burst != nil && s.err == nil {
		s.err = s.h.Burst(b)
	}
}

// emitSegment hands over a segment of an undecided group as a burst of
// its own, with one piece cut from the kept readings.
func (s *Scanner) emitSegment(c segment) {
	idx := s.nBursts + 1
	b := s.makeBurst(c, idx, false, 0, false)
	if b == nil {
		return
	}
	s.nBursts = idx
	if s.h.Piece != nil {
		k := &s.keep
		i0 := int(c.preStart - s.g.preStart)
		i1 := int(c.closeAt-s.g.preStart) + 1
		i0, i1 = max(0, i0), min(len(k.rd), i1)
		var fm, am []float32
		if len(k.fm) >= i1*s.readN {
			fm, am = k.fm[i0*s.readN:i1*s.readN], k.am[i0*s.readN:i1*s.readN]
		}
		s.sendPiece(k.rd[i0:i1], fm, am, idx, 0, true, false, b.StartS, b.EndS)
		b.Pieces = 1
	}
	if s.h.Burst != nil && s.err == nil {
		s.err = s.h.Burst(b)
	}
}

// makeBurst measures segment c (or a keyed group's sum) as Burst index;
// nil when it is shorter than MinBurstS. With own, the burst takes the
// kept audio (the group is done with it) instead of a copy.
func (s *Scanner) makeBurst(c segment, index int, keyed bool, unitS float64, own bool) *Burst {
	startS, endS := s.edgeTime(c.startIdx), s.edgeTime(c.endIdx)
	if c.cutStart {
		startS = 0
	}
	if endS-startS < s.cfg.MinBurstS {
		return nil
	}
	return s.forceBurst(c, index, keyed, unitS, own)
}

func (s *Scanner) forceBurst(c segment, index int, keyed bool, unitS float64, own bool) *Burst {
	startS, endS := s.edgeTime(c.startIdx), s.edgeTime(c.endIdx)
	if c.cutStart {
		startS = 0
	}
	lv := c.in
	if keyed && c.inKD.n > 0 {
		lv = c.inKD
	}
	n := float64(max(lv.n, 1))
	mean, noise := lv.p/n, lv.noise/n
	if !(noise > 0) {
		noise = s.noiseLin
	}
	bu := &Burst{
		Index:           index,
		StartSample:     int64(math.Round(startS * s.info.SampleRate)),
		EndSample:       int64(math.Round(endS * s.info.SampleRate)),
		StartS:          startS,
		EndS:            endS,
		Start:           s.timeOf(startS),
		End:             s.timeOf(endS),
		OffsetHz:        s.offsetHz + cmplx.Phase(lv.r1-complex(lv.noise*s.noiseLag1, 0))*s.outRate/(2*math.Pi),
		LevelDB:         dsp.DBFS(mean),
		PeakDB:          dsp.DBFS(math.Max(c.peak, mean)),
		NoiseDB:         dsp.DBFS(noise),
		Clipped:         float64(c.in.clip) / (float64(max(c.in.n, 1)) * float64(s.chunkIn)),
		ChannelRateHz:   s.outRate,
		CutAtStart:      c.cutStart,
		CutAtEnd:        c.cutEnd,
		DoubleCarrier:   c.win.n >= 2 && c.win.hi-c.win.lo > doubleCarrierHz,
		CarrierSpreadHz: c.win.hi - c.win.lo,
		Keyed:           keyed,
		KeyUnitS:        unitS,
	}
	bu.SNRDB = s.snrDB(mean, noise)
	if s.info.CenterHz != 0 {
		bu.FreqHz = s.info.CenterHz + bu.OffsetHz
	}
	// the kept level track and audio, when the burst fits in them
	k := &s.keep
	i0 := int64(math.Ceil(c.startIdx-0.5)) - s.g.preStart
	i1 := int64(math.Floor(c.endIdx-0.5)) - s.g.preStart
	kept := i0 >= 0 && i1 < int64(len(k.rd)) && i1 >= i0
	if kept {
		bu.Level = make([]LevelSample, 0, i1-i0+1)
		for i := i0; i <= i1; i++ {
			l := s.levelSample(k.rd[i])
			if keyed {
				l.KeyUp = !(k.rd[i].on && (i == 0 || k.rd[i-1].on) && (i+1 >= int64(len(k.rd)) || k.rd[i+1].on))
			}
			bu.Level = append(bu.Level, l)
		}
	} else {
		bu.LevelTruncated = true
	}
	if s.cfg.KeepAudio {
		if kept && len(k.fm) > 0 {
			// the audio from 0.1 s before to 0.1 s after the burst
			audioStart := s.g.preStart * int64(s.readN) // channel-rate index of keep.fm[0]
			a0 := int64(math.Floor((startS-0.1)*s.outRate+s.delayIn/float64(s.dec))) - audioStart
			a1 := int64(math.Ceil((endS+0.1)*s.outRate+s.delayIn/float64(s.dec))) - audioStart
			a0 = max(0, a0)
			a1 = min(int64(len(k.fm)), a1)
			if a1 > a0 {
				if own {
					bu.FMAudio, bu.AMAudio = k.fm[a0:a1:a1], k.am[a0:a1:a1]
					k.fm, k.am = nil, nil
				} else {
					bu.FMAudio = append([]float32(nil), k.fm[a0:a1]...)
					bu.AMAudio = append([]float32(nil), k.am[a0:a1]...)
				}
				bu.AudioStartS = (float64(audioStart+a0)*float64(s.dec) - s.delayIn) / s.info.SampleRate
			}
		} else if !kept {
			bu.AudioTruncated = true
		}
	}
	return bu
}

// doubleCarrierHz is the carrier step inside one burst that marks two
// transmitters on the air at once: far above the few hertz one carrier
// wanders, and below the tens to hundreds of hertz by which cheap crystals
// differ (common practice).
const doubleCarrierHz = 60
