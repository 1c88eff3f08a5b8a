package idmatch

import (
	"errors"
	"fmt"
	"nullseek/ident/internal/identtest"
	"nullseek/ident/morse"
	"nullseek/internal/testtool"
	"os/exec"
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
		_, err := New(tc.ids)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("New(%q): %v; want error with %s", tc.ids, err, tc.want)
		}
	}
}

func TestParseIDList(t *testing.T) {
	ids, err := ParseList(" N0CALL/1, N0CALL/2 ,N0CALL/3")
	if err != nil || strings.Join(ids, "|") != "N0CALL/1|N0CALL/2|N0CALL/3" {
		t.Errorf("got %q, %v", ids, err)
	}
	for _, bad := range []string{"", "N0CALL/1,,N0CALL/2", "N0CALL/1,n0call/1", "N0CALL!"} {
		if _, err := ParseList(bad); err == nil {
			t.Errorf("ParseList(%q): want an error", bad)
		}
	}
	ids, err = ReadList(strings.NewReader("# beacons\nN0CALL/1\n\n  N0CALL/2  # second\n"))
	if err != nil || len(ids) != 2 || ids[1] != "N0CALL/2" {
		t.Errorf("ReadList: %q, %v", ids, err)
	}
	_, err = ReadList(strings.NewReader("N0CALL/1\nN0CALL/1\n"))
	if err == nil || !strings.Contains(err.Error(), "line 2") || !errors.Is(err, ErrBadList) {
		t.Errorf("duplicate on line 2: %v", err)
	}
	if _, err := ReadList(strings.NewReader("# nothing\n")); err == nil {
		t.Error("empty file: want an error")
	}
	if _, err := LoadFile(filepath.Join(t.TempDir(), "missing.txt")); err == nil {
		t.Error("missing file: want an error")
	}
}

func FuzzParseList(f *testing.F) {
	for _, s := range []string{"N0CALL/1,N0CALL/2", "", ",", "a,A", "<AR>,+", "É,é", "\xff"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		ids, err := ParseList(s)
		if err != nil {
			return
		}
		if _, err := New(ids); err != nil {
			t.Fatalf("ParseList accepted %q but New says %v", s, err)
		}
		if _, err := ReadList(strings.NewReader(strings.Join(ids, "\n"))); err != nil && !strings.Contains(strings.Join(ids, ""), "#") {
			t.Fatalf("ReadList rejects what ParseList accepted: %v", err)
		}
	})
}

func decodeFixture(t *testing.T, name string) (morse.Decoded, []float32, float64) {
	t.Helper()
	a, rate, err := identtest.ReadWAV(filepath.Join(identtest.MorseDir, name))
	if err != nil {
		t.Fatal(err)
	}
	d, err := morse.DecodeTone(a, rate, morse.DecodeOptions{})
	if err != nil {
		t.Fatal(err)
	}
	return d, a, rate
}

var fiveIDs = []string{"N0CALL/1", "N0CALL/2", "N0CALL/3", "N0CALL/4", "N0CALL/5"}

func TestMatchCases(t *testing.T) {
	m, err := New(fiveIDs)
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
	both, err := morse.DecodeTone(append(append([]float32(nil), a1...), a4...), rate, morse.DecodeOptions{})
	if err != nil {
		t.Fatal(err)
	}
	got = m.Match(both)
	w := strings.Join(got.Warnings, ";")
	if (got.ID != "N0CALL/1" && got.ID != "N0CALL/4") || !strings.Contains(w, "N0CALL/1") || !strings.Contains(w, "N0CALL/4") {
		t.Errorf("two IDs: %+v", got)
	}

	// Too short to hold an ID: the first 1.2 s.
	short, err := morse.DecodeTone(a1[:int(1.2*rate)], rate, morse.DecodeOptions{})
	if err == nil {
		got = m.Match(short)
		if got.ID != Unknown || len(got.Warnings) == 0 {
			t.Errorf("short burst %q: %+v", short.Text, got)
		}
	}

	// An ID not on the list: never guessed.
	m2, _ := New([]string{"N0CALL/2", "N0CALL/3"})
	got = m2.Match(d1)
	if got.ID != Unknown || len(got.Warnings) == 0 {
		t.Errorf("unlisted ID: %+v", got)
	}
	m3, _ := New([]string{"N0CALL/2"})
	if got = m3.Match(d1); got.ID != Unknown {
		t.Errorf("single unlisted ID: %+v", got)
	}

	// Garbled text: the template method from the envelope. Characters are
	// blanked so the text method cannot answer.
	g := d1
	g.Chars = nil
	for i, c := range d1.Chars {
		if i%3 != 0 {
			c.Text, c.Confidence = morse.UnknownChar, 0
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
	if got = m.Match(morse.Decoded{}); got.ID != Unknown {
		t.Errorf("empty: %+v", got)
	}
}

// idAccuracy matches every "id" burst of a manifest against N0CALL/1..5.
func idAccuracy(t *testing.T, dir string) (right, total int, methods map[string]int) {
	m, err := New([]string{"N0CALL/1", "N0CALL/2", "N0CALL/3", "N0CALL/4", "N0CALL/5"})
	if err != nil {
		t.Fatal(err)
	}
	methods = map[string]int{}
	for _, r := range testtool.TSVRows(t, filepath.Join(dir, "manifest.tsv")) {
		if r["kind"] != "id" {
			continue
		}
		total++
		want := strings.Fields(r["text"])[0]
		a, rate, err := identtest.ReadWAV(filepath.Join(dir, r["file"]))
		if err != nil {
			t.Fatal(err)
		}
		d, err := morse.DecodeTone(a, rate, morse.DecodeOptions{Mode: morse.ModeFM})
		if err != nil {
			t.Logf("%s: %v", r["file"], err)
			continue
		}
		got := m.Match(d)
		methods[got.Method]++
		if got.ID == want {
			right++
		} else {
			t.Logf("%s (CNR %s): sent %s, decoded %q, matched %s (%.2f, %s) %v", r["file"], r["cnr_db"], want, d.Text, got.ID, got.Confidence, got.Method, got.Warnings)
		}
		if got.ID != want && got.ID != Unknown {
			t.Errorf("%s: wrong identifier %s reported with confidence %.2f (sent %s)", r["file"], got.ID, got.Confidence, want)
		}
	}
	return right, total, methods
}

// TestFMKnownIDAccuracy: ≥ 95 % of the 25 ID bursts at CNR 6 dB are
// matched to the identifier sent (task requirement), and none wrongly.
func TestFMKnownIDAccuracy(t *testing.T) {
	right, total, methods := idAccuracy(t, filepath.Join(identtest.MorseDir, "fm"))
	t.Logf("known-ID matching at CNR 6 dB: %d/%d right; methods %v", right, total, methods)
	if total < 20 || float64(right) < 0.95*float64(total) {
		t.Errorf("%d/%d bursts matched, want ≥ 95 %% of ≥ 20", right, total)
	}
}

// TestFMFreshNoise regenerates ten ID bursts at CNR 6 dB with another
// noise seed and repeats the known-ID check, so the committed set is not a
// lucky draw (all 39 files would take too long on a shared machine).
func TestFMFreshNoise(t *testing.T) {
	if testing.Short() {
		t.Skip("short mode: fresh GNU Radio generation skipped")
	}
	py := testtool.GNURadio(t, "ebook2cw", "sox")
	dir := t.TempDir()
	cmd := exec.Command(py, "make_fm_iq.py", "--out", dir, "--seed", "2", "--no-iq", "--only", "id", "--id-bursts", "10")
	cmd.Dir = identtest.MorseDir
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("make_fm_iq.py: %v\n%s", err, out)
	}
	right, total, methods := idAccuracy(t, dir)
	t.Logf("fresh seed: known-ID %d/%d at CNR 6 dB; methods %v", right, total, methods)
	if total != 10 || float64(right) < 0.95*float64(total) {
		t.Errorf("%d/%d bursts matched", right, total)
	}
}

// TestListBounds: a list of MaxIDs identifiers of MaxIDLen characters is
// taken; one more identifier, or one more character, is refused with an
// error naming the limit (and, from a file, the line).
func TestListBounds(t *testing.T) {
	ids := make([]string, MaxIDs)
	for i := range ids {
		ids[i] = fmt.Sprintf("N0CALL/%d", i)
	}
	if _, err := New(ids); err != nil {
		t.Fatalf("%d identifiers: %v", MaxIDs, err)
	}
	_, err := New(append(ids, "N0CALL/X"))
	if err == nil || !strings.Contains(err.Error(), fmt.Sprint(MaxIDs)) || !errors.Is(err, ErrBadList) {
		t.Errorf("%d identifiers: %v", MaxIDs+1, err)
	}
	_, err = ReadList(strings.NewReader(strings.Join(append(ids, "N0CALL/X"), "\n")))
	if err == nil || !strings.Contains(err.Error(), fmt.Sprintf("line %d", MaxIDs+1)) {
		t.Errorf("file of %d identifiers: %v", MaxIDs+1, err)
	}
	long := strings.Repeat("N", MaxIDLen)
	if _, err := New([]string{long}); err != nil {
		t.Errorf("%d characters: %v", MaxIDLen, err)
	}
	for _, bad := range []string{long + "N", strings.Repeat("N", 1<<20)} {
		_, err := New([]string{bad})
		if err == nil || !strings.Contains(err.Error(), fmt.Sprint(MaxIDLen)) || len(err.Error()) > 200 {
			t.Errorf("%d-character identifier: %.200v", len(bad), err)
		}
	}
	// Spaces do not count: "N0CALL 1" is the characters N0CALL1.
	if _, err := New([]string{strings.Repeat("N ", MaxIDLen)}); err != nil {
		t.Errorf("%d characters with spaces: %v", MaxIDLen, err)
	}
}
