package morse

import (
	"errors"
	"math"
	"nullseek/internal/testtool"
	"os/exec"
	"regexp"
	"strings"
	"testing"
)

func TestModeStringParse(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want Mode
	}{{"auto", ModeAuto}, {"FM", ModeFM}, {" am ", ModeAM}, {"cw", ModeCW}} {
		got, err := ParseMode(tc.in)
		if err != nil || got != tc.want {
			t.Errorf("ParseMode(%q) = %v, %v; want %v", tc.in, got, err, tc.want)
		}
		if strings.TrimSpace(strings.ToLower(tc.in)) != got.String() {
			t.Errorf("%v.String() = %q", got, got.String())
		}
	}
	if _, err := ParseMode("usb"); err == nil {
		t.Error("ParseMode(usb): want an error")
	}
}

// itu1677 is the character table of ITU-R M.1677-1 (10/2009) §1.1.1–1.1.3
// Annex 1 (letters, digits, punctuation).
var itu1677 = map[string]string{
	"A": ".-", "B": "-...", "C": "-.-.", "D": "-..", "E": ".", "F": "..-.", "G": "--.",
	"H": "....", "I": "..", "J": ".---", "K": "-.-", "L": ".-..", "M": "--", "N": "-.",
	"O": "---", "P": ".--.", "Q": "--.-", "R": ".-.", "S": "...", "T": "-", "U": "..-",
	"V": "...-", "W": ".--", "X": "-..-", "Y": "-.--", "Z": "--..", "É": "..-..",
	"1": ".----", "2": "..---", "3": "...--", "4": "....-", "5": ".....",
	"6": "-....", "7": "--...", "8": "---..", "9": "----.", "0": "-----",
	".": ".-.-.-", ",": "--..--", ":": "---...", "?": "..--..", "'": ".----.",
	"-": "-....-", "/": "-..-.", "(": "-.--.", ")": "-.--.-", "\"": ".-..-.",
	"=": "-...-", "+": ".-.-.", "×": "-..-", "@": ".--.-.",
}

func TestMorseTableITU(t *testing.T) {
	// Source: ITU-R M.1677-1 Annex 1 §1.1.1–1.1.3.
	for ch, code := range itu1677 {
		if got := morseTable[ch]; got != code {
			t.Errorf("%q: table has %q, ITU-R M.1677-1 gives %q", ch, got, code)
		}
	}
	// Service signals (ITU-R M.1677-1 Annex 1 §1.1.3, partly from memory): end of work
	// ...-.- (SK), wait .-... (AS), starting signal -.-.- (CT).
	for _, tc := range [][2]string{{"<SK>", "...-.-"}, {"<AS>", ".-..."}, {"<CT>", "-.-.-"}, {"<SN>", "...-."}, {"<HH>", "........"}} {
		if morseTable[tc[0]] != tc[1] {
			t.Errorf("%s: %q, want %q", tc[0], morseTable[tc[0]], tc[1])
		}
	}
	// Every code decodes back to a text with the same code.
	for code, txt := range reverseTable {
		if morseTable[txt] != code {
			t.Errorf("reverse %q -> %q -> %q", code, txt, morseTable[txt])
		}
	}
}

// TestMorseTableEbook2cw compares the table with ebook2cw's own (ebook2cw
// 0.8.4 `-S ISO` prints its code table as HTML), an independent
// implementation.
func TestMorseTableEbook2cw(t *testing.T) {
	bin := testtool.Need(t, "ebook2cw")
	out, err := exec.Command(bin, "-E", "/dev/null", "-S", "ISO").CombinedOutput()
	if err != nil {
		t.Fatalf("ebook2cw -S ISO: %v", err)
	}
	re := regexp.MustCompile(`<tr><td>(\d+)</td><td>[^<]*</td><td>([.\- ]+)</td></tr>`)
	n := 0
	for _, m := range re.FindAllStringSubmatch(string(out), -1) {
		var code int
		for _, c := range m[1] {
			code = code*10 + int(c-'0')
		}
		if code > 127 {
			continue // the ASCII part is what ITU and ebook2cw share
		}
		ch := string(rune(code))
		mine, ok := morseTable[strings.ToUpper(ch)]
		if !ok {
			continue // ebook2cw sends extras such as '!', '$', '&', ';'
		}
		n++
		if mine != m[2] {
			t.Errorf("%q: ours %q, ebook2cw %q", ch, mine, m[2])
		}
	}
	if n < 50 {
		t.Fatalf("compared only %d characters with ebook2cw's table", n)
	}
}

func unitsOf(marks []Mark, u float64) float64 {
	last := marks[len(marks)-1]
	return (last.StartS + last.DurS) / u
}

func TestEncodeRatiosAndPARIS(t *testing.T) {
	for _, wpm := range []float64{5, 13, 20, 40} {
		// PARIS standard: "PARIS " is 50 units, dot = 1200/WPM ms
		// (common practice: brainwagon.org 2010-02-08; morsecode.world).
		u := DotSeconds(wpm)
		if math.Abs(u-1.2/wpm) > 1e-12 {
			t.Fatalf("dot at %g WPM = %g s", wpm, u)
		}
		m, err := Encode("PARIS", wpm, 0)
		if err != nil {
			t.Fatal(err)
		}
		// + 7-unit word gap to the next PARIS = 50 units = 60/wpm seconds.
		if got := unitsOf(m, u) + 7; math.Abs(got-50) > 1e-9 {
			t.Errorf("%g WPM: PARIS + word gap = %g units, want 50", wpm, got)
		}
		if got := (unitsOf(m, u) + 7) * u; math.Abs(got-60/wpm) > 1e-9 {
			t.Errorf("%g WPM: one word takes %g s, want %g", wpm, got, 60/wpm)
		}
	}
	// ITU-R M.1677-1 Annex 1 §2: dash = 3 dots, element gap 1, letter gap
	// 3, word gap 7.
	m, err := Encode("ET A", 20, 0)
	if err != nil {
		t.Fatal(err)
	}
	u := DotSeconds(20)
	want := []struct {
		on    bool
		units float64
	}{{true, 1}, {false, 3}, {true, 3}, {false, 7}, {true, 1}, {false, 1}, {true, 3}}
	if len(m) != len(want) {
		t.Fatalf("got %d marks, want %d: %+v", len(m), len(want), m)
	}
	for i, w := range want {
		if m[i].On != w.on || math.Abs(m[i].DurS/u-w.units) > 1e-9 || m[i].Units != int(w.units) {
			t.Errorf("mark %d: %+v, want on=%v %g units", i, m[i], w.on, w.units)
		}
	}
}

func TestEncodeFarnsworth(t *testing.T) {
	// J. Bloom KE3Z, "A Standard for Morse Timing Using the Farnsworth
	// Technique", QEX April 1990: c=20, s=10 → ta = 4.14 s,
	// tc = 0.654 s, tw = 1.525 s; PARIS = 31·0.06 + 4tc + tw = 6.0 s.
	m, err := Encode("PARIS", 20, 10)
	if err != nil {
		t.Fatal(err)
	}
	var charGap, wordGap float64
	for _, mk := range m {
		if !mk.On && mk.Units == 3 {
			charGap = mk.DurS
		}
	}
	_, wordGap = farnsworthGaps(20, 10)
	if math.Abs(charGap-0.654) > 0.0005 || math.Abs(wordGap-1.525) > 0.0005 {
		t.Errorf("tc = %.4f s, tw = %.4f s; want 0.654, 1.525", charGap, wordGap)
	}
	last := m[len(m)-1]
	if got := last.StartS + last.DurS + wordGap; math.Abs(got-6.0) > 1e-9 {
		t.Errorf("PARIS at 20/10 WPM = %.4f s, want 6.0", got)
	}
	// Effective speed at or above the character speed is standard timing.
	a, _ := Encode("PARIS", 20, 0)
	b, _ := Encode("PARIS", 20, 25)
	if unitsOf(a, 1) != unitsOf(b, 1) {
		t.Error("Farnsworth ≥ character speed should not change timing")
	}
}

func TestEncodeErrors(t *testing.T) {
	for _, tc := range []struct {
		text, wantInErr string
		wpm             float64
	}{
		{"N0CALL#1", `"#"`, 20},
		{"ABC!", `"!"`, 20},
		{"<ZZ>", `"<ZZ>"`, 20},
		{"<AR", "unclosed", 20},
		{"   ", "nothing to send", 20},
		{"TEST", "out of range", 0},
		{"TEST", "out of range", math.NaN()},
		{"\xff", "UTF-8", 20},
	} {
		_, err := Encode(tc.text, tc.wpm, 0)
		if err == nil || !strings.Contains(err.Error(), tc.wantInErr) {
			t.Errorf("Encode(%q): %v; want error containing %s", tc.text, err, tc.wantInErr)
		}
	}
	if _, err := Encode("N0CALL#1", 20, 0); !errors.Is(err, ErrUnsendable) {
		t.Errorf("want ErrUnsendable, got %v", err)
	}
}

func TestCanonicalText(t *testing.T) {
	for in, want := range map[string]string{
		"n0call/1": "N0CALL/1", "a  b": "A B", "+": "<AR>", "<BT>": "=", "(": "<KN>", "<sk>": "<SK>",
	} {
		got, err := CanonicalText(in)
		if err != nil || got != want {
			t.Errorf("CanonicalText(%q) = %q, %v; want %q", in, got, err, want)
		}
	}
}
