package ident

import (
	"errors"
	"path/filepath"
	"strings"
	"testing"
)

func TestNewMatcherErrors(t *testing.T) {
	for _, tc := range []struct {
		ids  []string
		want string // substring of the error
	}{
		{[]string{"N0CALL/1", "n0call/1"}, `"n0call/1" duplicates "N0CALL/1"`},
		{[]string{"N0CALL/1", " "}, "identifier 2 is empty"},
		{[]string{"N0CALL#1"}, `"N0CALL#1": "#"`},
		{[]string{"N0CALL/1", "N0CALL_2"}, `"N0CALL_2": "_"`},
		{[]string{"A+", "A<AR>"}, "duplicates"}, // same Morse code
		{nil, "no identifiers"},
	} {
		_, err := NewMatcher(tc.ids)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("NewMatcher(%q): %v; want error with %s", tc.ids, err, tc.want)
		}
	}
}

func TestParseIDList(t *testing.T) {
	ids, err := ParseIDList(" N0CALL/1, N0CALL/2 ,N0CALL/3")
	if err != nil || strings.Join(ids, "|") != "N0CALL/1|N0CALL/2|N0CALL/3" {
		t.Errorf("got %q, %v", ids, err)
	}
	for _, bad := range []string{"", "N0CALL/1,,N0CALL/2", "N0CALL/1,n0call/1", "N0CALL!"} {
		if _, err := ParseIDList(bad); err == nil {
			t.Errorf("ParseIDList(%q): want an error", bad)
		}
	}
	ids, err = ReadIDList(strings.NewReader("# beacons\nN0CALL/1\n\n  N0CALL/2  # second\n"))
	if err != nil || len(ids) != 2 || ids[1] != "N0CALL/2" {
		t.Errorf("ReadIDList: %q, %v", ids, err)
	}
	_, err = ReadIDList(strings.NewReader("N0CALL/1\nN0CALL/1\n"))
	if err == nil || !strings.Contains(err.Error(), "line 2") || !errors.Is(err, ErrBadIDList) {
		t.Errorf("duplicate on line 2: %v", err)
	}
	if _, err := ReadIDList(strings.NewReader("# nothing\n")); err == nil {
		t.Error("empty file: want an error")
	}
	if _, err := LoadIDFile(filepath.Join(t.TempDir(), "missing.txt")); err == nil {
		t.Error("missing file: want an error")
	}
}

func FuzzParseIDList(f *testing.F) {
	for _, s := range []string{"N0CALL/1,N0CALL/2", "", ",", "a,A", "<AR>,+", "É,é", "\xff"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		ids, err := ParseIDList(s)
		if err != nil {
			return
		}
		if _, err := NewMatcher(ids); err != nil {
			t.Fatalf("ParseIDList accepted %q but NewMatcher says %v", s, err)
		}
		if _, err := ReadIDList(strings.NewReader(strings.Join(ids, "\n"))); err != nil && !strings.Contains(strings.Join(ids, ""), "#") {
			t.Fatalf("ReadIDList rejects what ParseIDList accepted: %v", err)
		}
	})
}

func decodeFixture(t *testing.T, name string) (Decoded, []float32, float64) {
	t.Helper()
	a, rate, err := mcReadWAV(filepath.Join(morseDir, name))
	if err != nil {
		t.Fatal(err)
	}
	d, err := DecodeTone(a, rate, DecodeOptions{})
	if err != nil {
		t.Fatal(err)
	}
	return d, a, rate
}

var fiveIDs = []string{"N0CALL/1", "N0CALL/2", "N0CALL/3", "N0CALL/4", "N0CALL/5"}

func TestMatchCases(t *testing.T) {
	m, err := NewMatcher(fiveIDs)
	if err != nil {
		t.Fatal(err)
	}
	// GNU Radio bursts (testdata/morse/fm, manifest.tsv): id_cnr6_00 sends
	// N0CALL/1 twice, id_cnr6_08 N0CALL/4 twice, both at 600 Hz.
	d1, a1, rate := decodeFixture(t, "fm/id_cnr6_00.wav")
	_, a4, _ := decodeFixture(t, "fm/id_cnr6_08.wav")

	got := m.Match(d1)
	if got.ID != "N0CALL/1" || got.Method != "text" || got.Confidence < m.MinConfidence {
		t.Errorf("plain burst: %+v", got)
	}

	// Two IDs in one burst: the stronger reported, a warning naming both.
	both, err := DecodeTone(append(append([]float32(nil), a1...), a4...), rate, DecodeOptions{})
	if err != nil {
		t.Fatal(err)
	}
	got = m.Match(both)
	w := strings.Join(got.Warnings, ";")
	if (got.ID != "N0CALL/1" && got.ID != "N0CALL/4") || !strings.Contains(w, "N0CALL/1") || !strings.Contains(w, "N0CALL/4") {
		t.Errorf("two IDs: %+v", got)
	}

	// Too short to hold an ID: the first 1.2 s.
	short, err := DecodeTone(a1[:int(1.2*rate)], rate, DecodeOptions{})
	if err == nil {
		got = m.Match(short)
		if got.ID != UnknownID || len(got.Warnings) == 0 {
			t.Errorf("short burst %q: %+v", short.Text, got)
		}
	}

	// An ID not on the list: never guessed.
	m2, _ := NewMatcher([]string{"N0CALL/2", "N0CALL/3"})
	got = m2.Match(d1)
	if got.ID != UnknownID || len(got.Warnings) == 0 {
		t.Errorf("unlisted ID: %+v", got)
	}
	m3, _ := NewMatcher([]string{"N0CALL/2"})
	if got = m3.Match(d1); got.ID != UnknownID {
		t.Errorf("single unlisted ID: %+v", got)
	}

	// Garbled text: the template method from the envelope. Characters are
	// blanked so the text method cannot answer.
	g := d1
	g.Chars = nil
	for i, c := range d1.Chars {
		if i%3 != 0 {
			c.Text, c.Confidence = mcUnknownChar, 0
		}
		g.Chars = append(g.Chars, c)
	}
	got = m.Match(g)
	if got.ID != "N0CALL/1" || got.Method != "template" {
		t.Errorf("garbled text: %+v", got)
	}
	if got.Scores[0].Copies < 2 {
		t.Errorf("template copies %d, want 2", got.Scores[0].Copies)
	}

	// Empty decode: unknown, no panic.
	if got = m.Match(Decoded{}); got.ID != UnknownID {
		t.Errorf("empty: %+v", got)
	}
}
