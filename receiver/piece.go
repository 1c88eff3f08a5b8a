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

// emitPiece hands the piece buffer to Handler.Piece and, unless it was the
// last, keeps the overlap for the next piece.
func (s *Scanner) emitPiece(last bool) {
	b := &s.b
	pc := &s.pc
	if len(pc.rd) == 0 {
		return
	}
	s.levels = s.levels[:0]
	for _, r := range pc.rd {
		s.levels = append(s.levels, s.levelSample(r))
	}
	first, end := pc.rd[0].idx, pc.rd[len(pc.rd)-1].idx+1
	p := &s.piece
	*p = Piece{
		Burst:         b.index,
		Seq:           b.pieces,
		Last:          last,
		StartS:        s.edgeTime(float64(first)),
		EndS:          s.edgeTime(float64(end)),
		NoiseDB:       dsp.DBFS(b.noise),
		Level:         s.levels,
		ChannelRateHz: s.outRate,
	}
	p.StartSample = int64(math.Round(p.StartS * s.info.SampleRate))
	p.EndSample = int64(math.Round(p.EndS * s.info.SampleRate))
	p.OnS, p.OffS = p.StartS, p.EndS
	if b.pieces > 0 {
		p.OverlapS = float64(s.overlapN) * s.readingS()
	} else {
		p.OnS = s.startEdge()
	}
	if last {
		p.OffS = b.endS
	}
	if s.cfg.KeepAudio && !b.noAudio {
		p.FMAudio, p.AMAudio = pc.fm, pc.am
	}
	b.pieces++
	if s.err == nil {
		s.err = s.h.Piece(p)
	}
	if !last {
		pc.keepLast(s.overlapN, s.readN)
	}
}
