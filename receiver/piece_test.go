package receiver

import (
	"context"
	"math"
	"math/rand"
	"slices"
	"testing"
)

// pieceCopy is a Piece with its slices copied (the scanner reuses them).
func pieceCopy(p *Piece) Piece {
	c := *p
	c.Level = slices.Clone(p.Level)
	c.FMAudio = slices.Clone(p.FMAudio)
	c.AMAudio = slices.Clone(p.AMAudio)
	return c
}

// scanPieces scans src with a piece handler and returns the pieces and
// bursts found.
func scanPieces(t *testing.T, src *toneSource, cfg Config) ([]Piece, []*Burst) {
	t.Helper()
	sc, err := NewScanner(src.Info(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	var pieces []Piece
	var bursts []*Burst
	_, err = sc.Scan(context.Background(), src, Handler{
		Piece: func(p *Piece) error {
			if len(bursts) != p.Burst-1 {
				t.Errorf("piece %d of burst %d arrived after %d bursts", p.Seq, p.Burst, len(bursts))
			}
			pieces = append(pieces, pieceCopy(p))
			return nil
		},
		Burst: func(b *Burst) error { bursts = append(bursts, b); return nil },
	})
	if err != nil {
		t.Fatal(err)
	}
	return pieces, bursts
}

// TestPiecesOfLongBurst: a 50 s carrier is delivered in pieces of
// Config.PieceS that overlap by Config.PieceOverlapS, numbered, the last
// flagged; their audio and level readings are the burst's own (compared
// sample for sample with the audio the burst keeps); any stretch no longer
// than the overlap lies whole in one piece. With a cap below the burst's
// length, the burst keeps no track or audio and says so, and its summary
// does not change. The carrier sits 300 Hz above the channel centre, so the
// FM discriminator (GNU Radio quadrature_demod_cf semantics, gain 1) reads
// 2π·300/48000 rad per sample while it is on.
func TestPiecesOfLongBurst(t *testing.T) {
	const rate, on0, on1, total = 96000.0, 2.0, 52.0, 55.0
	mk := func() *toneSource {
		return &toneSource{rate: rate, offsetHz: 5300, amp: 0.1, sigma: 0.01,
			on: [][2]float64{{on0, on1}}, total: int64(total * rate), rng: rand.New(rand.NewSource(7))}
	}
	cfg := Config{OffsetHz: 5000, KeepAudio: true}
	pieces, bursts := scanPieces(t, mk(), cfg)
	if len(bursts) != 1 {
		t.Fatalf("%d bursts, want 1", len(bursts))
	}
	b := bursts[0]
	if math.Abs(b.StartS-on0) > 0.01 || math.Abs(b.EndS-on1) > 0.01 {
		t.Errorf("burst %.3f–%.3f s, want %.0f–%.0f", b.StartS, b.EndS, on0, on1)
	}
	d := DefaultConfig
	hop := d.PieceS - d.PieceOverlapS
	// 0.5 s pre-roll, then a piece every 12 s until the burst closes
	want := int(math.Ceil((b.EndS + 0.1 - (b.StartS - PreRollS) - d.PieceOverlapS) / hop))
	if len(pieces) != want || b.Pieces != want {
		t.Fatalf("%d pieces (burst says %d), want %d", len(pieces), b.Pieces, want)
	}
	const tol = 0.006 // a reading and a bit
	chRate := b.ChannelRateHz
	for i, p := range pieces {
		if p.Burst != b.Index || p.Seq != i || p.Last != (i == len(pieces)-1) {
			t.Errorf("piece %d: burst %d seq %d last %v", i, p.Burst, p.Seq, p.Last)
		}
		wantStart := b.StartS - PreRollS + float64(i)*hop
		if math.Abs(p.StartS-wantStart) > tol {
			t.Errorf("piece %d starts %.4f s, want %.4f", i, p.StartS, wantStart)
		}
		if !p.Last && math.Abs(p.EndS-p.StartS-d.PieceS) > tol {
			t.Errorf("piece %d spans %.4f s, want %.0f", i, p.EndS-p.StartS, d.PieceS)
		}
		if wantOv := map[bool]float64{true: 0, false: d.PieceOverlapS}[i == 0]; math.Abs(p.OverlapS-wantOv) > 1e-9 {
			t.Errorf("piece %d overlap %.3f s, want %.0f", i, p.OverlapS, wantOv)
		}
		if n := int(math.Round((p.EndS - p.StartS) * chRate)); len(p.FMAudio) != n || len(p.AMAudio) != n {
			t.Errorf("piece %d: %d/%d audio samples for %.4f s", i, len(p.FMAudio), len(p.AMAudio), p.EndS-p.StartS)
		}
		if n := int(math.Round((p.EndS - p.StartS) * d.ReadingsPerS)); len(p.Level) != n {
			t.Errorf("piece %d: %d readings for %.4f s", i, len(p.Level), p.EndS-p.StartS)
		}
		if p.Level[0].T < p.StartS || p.Level[len(p.Level)-1].T > p.EndS {
			t.Errorf("piece %d: readings %.4f–%.4f s outside it", i, p.Level[0].T, p.Level[len(p.Level)-1].T)
		}
		if math.Abs(p.NoiseDB-b.NoiseDB) > 0.1 { // the estimate moves a little with time
			t.Errorf("piece %d noise %.2f dBFS, burst %.2f", i, p.NoiseDB, b.NoiseDB)
		}
		// the piece's audio is the burst's, instant for instant
		for k := 0; k < len(p.FMAudio); k += 997 {
			j := int(math.Round((p.StartS + float64(k)/chRate - b.AudioStartS) * chRate))
			if j < 0 || j >= len(b.FMAudio) {
				continue
			}
			if p.FMAudio[k] != b.FMAudio[j] || p.AMAudio[k] != b.AMAudio[j] {
				t.Fatalf("piece %d sample %d (%.4f s) differs from the burst's audio", i, k, p.StartS+float64(k)/chRate)
			}
		}
		// on-part: the carrier's frequency from the discriminator
		fm, _, lv := (&p).Between(p.OnS, p.OffS)
		var mean float64
		for _, v := range fm {
			mean += float64(v)
		}
		mean /= float64(len(fm))
		if w := 2 * math.Pi * 300 / chRate; math.Abs(mean-w) > 0.01*w {
			t.Errorf("piece %d: discriminator mean %.5f rad/sample, want %.5f", i, mean, w)
		}
		if len(lv) == 0 || lv[0].T < p.OnS || lv[len(lv)-1].T > p.OffS {
			t.Errorf("piece %d: Between gave readings outside %.3f–%.3f s", i, p.OnS, p.OffS)
		}
	}
	if pieces[0].OnS != b.StartS || pieces[len(pieces)-1].OffS != b.EndS {
		t.Errorf("pieces on %.4f–%.4f s, burst %.4f–%.4f", pieces[0].OnS, pieces[len(pieces)-1].OffS, b.StartS, b.EndS)
	}
	// An identifier as long as the overlap fits in one piece wherever it
	// falls inside the burst.
	for t0 := b.StartS; t0+d.PieceOverlapS <= b.EndS; t0 += 0.25 {
		if !slices.ContainsFunc(pieces, func(p Piece) bool { return p.StartS <= t0 && t0+d.PieceOverlapS <= p.EndS }) {
			t.Errorf("%.2f–%.2f s lies in no single piece", t0, t0+d.PieceOverlapS)
		}
	}
	if len(b.Level) == 0 || b.LevelTruncated || b.AudioTruncated || len(b.FMAudio) == 0 {
		t.Errorf("a %.0f s burst under the %.0f s cap kept %d readings, %d audio samples (truncated %v/%v)",
			b.EndS-b.StartS, d.MaxKeepS, len(b.Level), len(b.FMAudio), b.LevelTruncated, b.AudioTruncated)
	}

	// Past the cap: no track, no audio, the same summary and pieces.
	cfg.MaxKeepS = 30
	pieces2, bursts2 := scanPieces(t, mk(), cfg)
	if len(bursts2) != 1 {
		t.Fatalf("capped: %d bursts, want 1", len(bursts2))
	}
	c := bursts2[0]
	if c.Level != nil || c.FMAudio != nil || c.AMAudio != nil || !c.LevelTruncated || !c.AudioTruncated {
		t.Errorf("capped burst kept %d readings, %d audio samples (truncated %v/%v)", len(c.Level), len(c.FMAudio), c.LevelTruncated, c.AudioTruncated)
	}
	if c.StartS != b.StartS || c.EndS != b.EndS || c.LevelDB != b.LevelDB || c.SNRDB != b.SNRDB || c.OffsetHz != b.OffsetHz || c.Pieces != b.Pieces {
		t.Errorf("capped burst summary differs: %+v vs %+v", *c, *b)
	}
	if len(pieces2) != len(pieces) || !slices.Equal(pieces2[1].FMAudio, pieces[1].FMAudio) {
		t.Errorf("capped scan gave different pieces")
	}
}

// TestPiecesShortBursts: bursts shorter than a piece come as one piece
// each, flagged last, numbered like their bursts, covering the burst.
func TestPiecesShortBursts(t *testing.T) {
	src := &toneSource{rate: 96000, offsetHz: 5000, amp: 0.1, sigma: 0.002,
		on: [][2]float64{{1, 2.5}, {4, 4.5}, {6, 9}}, total: 10 * 96000, rng: rand.New(rand.NewSource(3))}
	pieces, bursts := scanPieces(t, src, Config{OffsetHz: 5000})
	if len(bursts) != 3 || len(pieces) != 3 {
		t.Fatalf("%d bursts, %d pieces; want 3 and 3", len(bursts), len(pieces))
	}
	for i, p := range pieces {
		b := bursts[i]
		if p.Burst != b.Index || p.Seq != 0 || !p.Last || b.Pieces != 1 {
			t.Errorf("burst %d: piece burst %d seq %d last %v, burst says %d pieces", i+1, p.Burst, p.Seq, p.Last, b.Pieces)
		}
		if p.StartS > b.StartS-PreRollS+0.006 || p.EndS < b.EndS || p.OnS != b.StartS || p.OffS != b.EndS {
			t.Errorf("burst %d at %.3f–%.3f s, piece %.3f–%.3f (on %.3f–%.3f)", i+1, b.StartS, b.EndS, p.StartS, p.EndS, p.OnS, p.OffS)
		}
		if p.FMAudio != nil {
			t.Errorf("burst %d: audio in a piece although KeepAudio is off", i+1)
		}
	}
}
