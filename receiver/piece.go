package receiver

import (
	"math"
	"slices"

	"nullseek/dsp"
)

// preRoll is a ring of the latest readings and their audio, oldest first
// from start(): what a burst's first piece begins with.
type preRoll struct {
	rd     []reading
	fm, am []float32 // n·readN values each; nil without audio
	readN  int
	pos, n int // next slot, readings held
}

func newPreRoll(n, readN int, audio bool) preRoll {
	p := preRoll{rd: make([]reading, n), readN: readN}
	if audio {
		p.fm = make([]float32, n*readN)
		p.am = make([]float32, n*readN)
	}
	return p
}

func (p *preRoll) push(r reading, fm, am []float32) {
	p.rd[p.pos] = r
	if p.fm != nil {
		copy(p.fm[p.pos*p.readN:(p.pos+1)*p.readN], fm)
		copy(p.am[p.pos*p.readN:(p.pos+1)*p.readN], am)
	}
	p.pos = (p.pos + 1) % len(p.rd)
	p.n = min(p.n+1, len(p.rd))
}

func (p *preRoll) reset() { p.pos, p.n = 0, 0 }

// at returns the i-th oldest reading held and its audio (nil without).
func (p *preRoll) at(i int) (reading, []float32, []float32) {
	k := (p.pos - p.n + i + len(p.rd)) % len(p.rd)
	if p.fm == nil {
		return p.rd[k], nil, nil
	}
	return p.rd[k], p.fm[k*p.readN : (k+1)*p.readN], p.am[k*p.readN : (k+1)*p.readN]
}

// pieceBuf holds consecutive readings with their audio (readN values per
// reading when audio is kept). Its slices keep their capacity from one
// burst to the next, so once grown it allocates nothing.
type pieceBuf struct {
	rd     []reading
	fm, am []float32
}

func (b *pieceBuf) reset() {
	b.rd, b.fm, b.am = b.rd[:0], b.fm[:0], b.am[:0]
}

// add appends r; fm and am are appended when audio is true. Full
// buffers (capN readings, capN·len(fm) audio values) grow by doubling,
// up to capN, so that filling one costs at most twice its size.
func (b *pieceBuf) add(r reading, fm, am []float32, audio bool, capN int) {
	if len(b.rd) == cap(b.rd) {
		b.rd = slices.Grow(b.rd, min(max(len(b.rd), 256), capN-len(b.rd)))
	}
	b.rd = append(b.rd, r)
	if audio {
		if len(b.fm)+len(fm) > cap(b.fm) {
			n := min(max(len(b.fm), 64*len(fm)), (capN-len(b.rd)+1)*len(fm))
			b.fm = slices.Grow(b.fm, max(n, len(fm)))
			b.am = slices.Grow(b.am, max(n, len(fm)))
		}
		b.fm = append(b.fm, fm...)
		b.am = append(b.am, am...)
	}
}

// keepLast drops all but the last n readings (and their audio).
func (b *pieceBuf) keepLast(n, readN int) {
	if n >= len(b.rd) {
		return
	}
	drop := len(b.rd) - n
	b.rd = b.rd[:copy(b.rd, b.rd[drop:])]
	if len(b.fm) > 0 {
		a := min(drop*readN, len(b.fm))
		b.fm = b.fm[:copy(b.fm, b.fm[a:])]
		b.am = b.am[:copy(b.am, b.am[a:])]
	}
}

func (p *preRoll) cap() int { return len(p.rd) }

// groupStartS is the open group's start edge, seconds.
func (s *Scanner) groupStartS() float64 {
	g := &s.g
	c := &g.cur
	switch {
	case g.aggN > 0:
		c = &g.agg
	case len(g.segs) > 0:
		c = &g.segs[0]
	case !c.startKnown:
		s.segmentStart(c)
	}
	if c.cutStart {
		return 0
	}
	return s.edgeTime(c.startIdx)
}

// emitPiece hands the piece buffer to Handler.Piece as the open group's
// next piece and, unless it was the last, keeps the overlap for the next
// one. onS and offS are the burst's edges for the last piece.
func (s *Scanner) emitPiece(last bool, edges ...float64) {
	g := &s.g
	pc := &s.pc
	if len(pc.rd) == 0 {
		return
	}
	first, end := s.edgeTime(float64(pc.rd[0].idx)), s.edgeTime(float64(pc.rd[len(pc.rd)-1].idx+1))
	onS, offS := first, end
	if g.pieces == 0 {
		onS = s.groupStartS()
	}
	if last && len(edges) == 2 {
		onS = max(onS, edges[0])
		if g.pieces == 0 {
			onS = edges[0]
		}
		offS = edges[1]
	}
	s.sendPiece(pc.rd, pc.fm, pc.am, g.index, g.pieces, last, g.keyed, onS, offS)
	g.pieces++
	if !last {
		pc.keepLast(s.overlapN, s.readN)
	}
}

// sendPiece builds the Piece for readings rd (with their audio) and hands
// it over.
func (s *Scanner) sendPiece(rd []reading, fm, am []float32, burst, seq int, last, keyed bool, onS, offS float64) {
	s.levels = s.levels[:0]
	var noise float64
	for i, r := range rd {
		l := s.levelSample(r)
		if keyed {
			l.KeyUp = !(r.on && (i == 0 || rd[i-1].on) && (i+1 == len(rd) || rd[i+1].on))
		}
		s.levels = append(s.levels, l)
		noise += r.noise
	}
	p := &s.piece
	*p = Piece{
		Burst:         burst,
		Seq:           seq,
		Last:          last,
		Keyed:         keyed,
		StartS:        s.edgeTime(float64(rd[0].idx)),
		EndS:          s.edgeTime(float64(rd[len(rd)-1].idx + 1)),
		NoiseDB:       dsp.DBFS(noise / float64(len(rd))),
		Level:         s.levels,
		ChannelRateHz: s.outRate,
		OnS:           onS,
		OffS:          offS,
	}
	p.StartSample = int64(math.Round(p.StartS * s.info.SampleRate))
	p.EndSample = int64(math.Round(p.EndS * s.info.SampleRate))
	if seq > 0 {
		p.OverlapS = float64(s.overlapN) * s.readingS()
	}
	if s.cfg.KeepAudio && len(fm) == len(rd)*s.readN {
		p.FMAudio, p.AMAudio = fm, am
	}
	if s.err == nil {
		s.err = s.h.Piece(p)
	}
}
