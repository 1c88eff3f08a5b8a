package ident

import (
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"nullseek/ident/internal/identtest"
	"nullseek/ident/morse"
	"nullseek/internal/testtool"
)

// feed hands audio (from time 0) to a transmission in pieces of pieceS
// seconds overlapping by overlapS, as the receiver does, and finishes it.
func feed(t *testing.T, id *Identifier, audio []float32, rate, pieceS, overlapS float64) Burst {
	t.Helper()
	tr := id.Begin()
	n, step := int(pieceS*rate), int((pieceS-overlapS)*rate)
	for a := 0; ; a += step {
		b := min(len(audio), a+n)
		ov := 0.0
		if a > 0 {
			ov = overlapS
		}
		if err := tr.Add(Segment{AudioStartS: float64(a) / rate, AudioRateHz: rate, FM: audio[a:b], OverlapS: ov}); err != nil {
			t.Fatal(err)
		}
		if b == len(audio) {
			break
		}
	}
	b, _ := tr.Finish(false, false)
	return b
}

// TestLongTurnsCombined: one-minute turns of a hunt beacon (the ID, a long
// steady tone, the ID, … three copies; GNU Radio 3.10 NBFM from ebook2cw
// 0.8.4 keying, testdata/ident/make_field.py turns) handed over in the
// receiver's 20 s pieces with 8 s overlap: every copy is read once (the
// overlaps are not read twice), the copies are combined, and the
// confidence rises with each copy — with a list (the text method) and
// without one (the repeated word). The reference is the ID given to
// ebook2cw.
func TestLongTurnsCombined(t *testing.T) {
	py := testtool.GNURadio(t, "ebook2cw", "sox")
	t.Parallel()
	dir := identtest.RunField(t, py, "turns", "--seed", "3", "--cnrs", "10,30", "--ids", "N0CALL/4", "--wpm", "20", "--tone-s", "22", "--copies", "3")
	listed, err := New(Options{Mode: morse.ModeFM, IDs: []string{"N0CALL/1", "N0CALL/2", "N0CALL/3", "N0CALL/4", "N0CALL/5"}})
	if err != nil {
		t.Fatal(err)
	}
	free, err := New(Options{Mode: morse.ModeFM})
	if err != nil {
		t.Fatal(err)
	}
	rows := testtool.TSVRows(t, filepath.Join(dir, "turns.tsv"))
	if len(rows) != 2 {
		t.Fatalf("%d turns, want 2", len(rows))
	}
	for _, r := range rows {
		audio, rate := identtest.MustReadWAV(t, filepath.Join(dir, r["file"]))
		id := r["id"]
		var ends []float64 // end of each copy's key-down
		for _, sp := range strings.Split(r["copy_s"], ";") {
			e, err := strconv.ParseFloat(strings.Split(sp, "-")[1], 64)
			if err != nil {
				t.Fatal(err)
			}
			ends = append(ends, e)
		}
		whole := feed(t, listed, audio, rate, 20, 8)
		want := strings.TrimSpace(strings.Repeat(id+" ", len(ends)))
		if whole.Text != want || whole.Ident != id || whole.Copies != len(ends) || whole.Method != "text" {
			t.Errorf("%s: read %q, named %s (%.4f, %s, %d copies); want %q, %s from %d copies", r["file"], whole.Text, whole.Ident, whole.Confidence, whole.Method, whole.Copies, want, id, len(ends))
		}
		// The first k copies only: the confidence rises with each.
		prev, prevFree := 0.0, 0.0
		for k := range ends {
			cut := audio[:min(len(audio), int((ends[k]+0.5)*rate))]
			b := feed(t, listed, cut, rate, 20, 8)
			t.Logf("%s, %d copies: %s at %.12f (%s)", r["file"], k+1, b.Ident, b.Confidence, b.Method)
			if b.Ident != id || !(b.Confidence > prev) {
				t.Errorf("%s with %d copies: %s at %.12f, after %.12f with one fewer; want %s, rising", r["file"], k+1, b.Ident, b.Confidence, prev, id)
			}
			prev = b.Confidence
			f := feed(t, free, cut, rate, 20, 8)
			if k == 0 {
				if f.Ident != "unknown" {
					t.Errorf("%s, one copy, no list: named %s (a word read once names nothing)", r["file"], f.Ident)
				}
				continue
			}
			t.Logf("%s, %d copies, no list: %s at %.12f (%s)", r["file"], k+1, f.Ident, f.Confidence, f.Method)
			if f.Ident != id || f.Method != "repeated-text" || f.Copies != k+1 || !(f.Confidence > prevFree) {
				t.Errorf("%s with %d copies, no list: %s at %.12f (%s, %d copies), after %.12f", r["file"], k+1, f.Ident, f.Confidence, f.Method, f.Copies, prevFree)
			}
			prevFree = f.Confidence
		}
	}
}
