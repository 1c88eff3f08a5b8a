package receiver

import (
	"context"
	"errors"
	"math"
	"path/filepath"
	"testing"

	"nullseek/sdr"
)

// TestChannelStateFollowsTheCarrier: on GNU Radio's four carriers in
// 3 dB steps (testdata/bursts/make_bursts.py, truth beside the recording;
// blocks of 50 ms, so the margins are a block, and MergeGapS after an end),
// the state handed over after every block says the carrier is up inside
// each burst with the truth's level (within 0.3 dB) and the SNR the burst
// reports when it closes (within 0.3 dB: the status line and the burst
// line agree), down between bursts, and nothing open before the first.
func TestChannelStateFollowsTheCarrier(t *testing.T) {
	base := filepath.Join("..", "testdata", "bursts", "steps96k")
	tr := readBurstTruth(t, base)
	src, err := sdr.Open(base+".sigmf-meta", sdr.RawParams{})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	rate := src.Info().SampleRate
	sc, err := NewScanner(src.Info(), Config{FreqHz: tr.CenterHz + tr.OffsetHz + 150})
	if err != nil {
		t.Fatal(err)
	}
	var bursts []*Burst
	var states []ChannelState
	if _, err := sc.Scan(context.Background(), src, Handler{
		Burst:   func(b *Burst) error { bursts = append(bursts, b); return nil },
		Channel: func(st ChannelState) error { states = append(states, st); return nil },
	}); err != nil {
		t.Fatal(err)
	}
	if len(bursts) != len(tr.Bursts) || len(states) < 20 {
		t.Fatalf("%d bursts (want %d), %d states", len(bursts), len(tr.Bursts), len(states))
	}
	var inside, between, before int
	for _, st := range states {
		ts := float64(st.Samples) / rate
		for i, w := range tr.Bursts {
			if ts >= w.StartS+0.06 && ts <= w.EndS-0.01 {
				inside++
				if !st.Open || !st.Carrier {
					t.Errorf("%.3f s, inside burst %d: open %v, carrier %v", ts, i+1, st.Open, st.Carrier)
				}
				if d := st.LevelDB - w.LevelDB; math.Abs(d) > 0.3 {
					t.Errorf("%.3f s: level %.2f dBFS, truth %.2f", ts, st.LevelDB, w.LevelDB)
				}
				if d := st.SNRDB - bursts[i].SNRDB; math.Abs(d) > 0.3 {
					t.Errorf("%.3f s: SNR %.2f dB, the burst's %.2f dB", ts, st.SNRDB, bursts[i].SNRDB)
				}
			}
			if i+1 < len(tr.Bursts) && ts >= w.EndS+0.1+0.05 && ts <= tr.Bursts[i+1].StartS-0.01 {
				between++
				if st.Carrier {
					t.Errorf("%.3f s, between bursts %d and %d: the carrier is said to be up", ts, i+1, i+2)
				}
			}
		}
		if ts < tr.Bursts[0].StartS-0.01 {
			before++
			if st.Open || st.Carrier {
				t.Errorf("%.3f s, before the first burst: open %v, carrier %v", ts, st.Open, st.Carrier)
			}
		}
	}
	if inside < 20 || between < 3 || before < 4 {
		t.Errorf("states checked: %d inside bursts, %d between, %d before the first; too few", inside, between, before)
	}
}

// TestReadingsComeBeforeTheirBurst: on the same GNU Radio recording, every
// reading of each burst's level track (its start edge to its end edge) has
// been handed to Handler.Reading, with the same level, before the Burst
// arrives, in time order; and an error from Reading or Channel stops the
// scan with that error.
func TestReadingsComeBeforeTheirBurst(t *testing.T) {
	base := filepath.Join("..", "testdata", "bursts", "steps96k")
	tr := readBurstTruth(t, base)
	scan := func(h Handler) error {
		src, err := sdr.Open(base+".sigmf-meta", sdr.RawParams{})
		if err != nil {
			t.Fatal(err)
		}
		defer src.Close()
		sc, err := NewScanner(src.Info(), Config{FreqHz: tr.CenterHz + tr.OffsetHz + 150})
		if err != nil {
			t.Fatal(err)
		}
		_, err = sc.Scan(context.Background(), src, h)
		return err
	}
	seen := map[int64]float64{}
	last := math.Inf(-1)
	bursts := 0
	err := scan(Handler{
		Reading: func(lv LevelSample) error {
			if lv.T < last {
				t.Errorf("reading at %.4f s after one at %.4f s", lv.T, last)
			}
			last = lv.T
			seen[lv.Sample] = lv.LevelDB
			return nil
		},
		Burst: func(b *Burst) error {
			bursts++
			if len(b.Level) < 50 {
				t.Errorf("burst %d keeps %d readings", b.Index, len(b.Level))
			}
			for _, lv := range b.Level {
				if got, ok := seen[lv.Sample]; !ok || got != lv.LevelDB {
					t.Errorf("burst %d: its reading at %.4f s (%.2f dBFS) was not handed over before it (seen %v, %.2f)", b.Index, lv.T, lv.LevelDB, ok, got)
					return nil
				}
			}
			return nil
		},
	})
	if err != nil || bursts != len(tr.Bursts) {
		t.Fatalf("scan: %v, %d bursts (want %d)", err, bursts, len(tr.Bursts))
	}
	stop := errors.New("the store is full")
	if err := scan(Handler{Reading: func(LevelSample) error { return stop }}); !errors.Is(err, stop) {
		t.Errorf("Reading's error: the scan returned %v", err)
	}
	if err := scan(Handler{Channel: func(ChannelState) error { return stop }}); !errors.Is(err, stop) {
		t.Errorf("Channel's error: the scan returned %v", err)
	}
}
