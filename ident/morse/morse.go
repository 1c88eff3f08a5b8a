// Package morse reads and writes Morse code: the ITU-R M.1677-1 code table
// and timing (Encode), and the decoders that turn a burst's demodulated
// audio (a keyed tone on FM or AM) or its channel power track (a keyed
// carrier) into characters with confidences (DecodeTone, DecodeKeyed,
// DecodeEnvelope), with the pitch finder and envelope they share
// (FindTone, ToneEnvelope) and the choice between them (DetectMode).
//
// Conventions: times are seconds from the first sample of the input;
// speeds are words per minute by the PARIS standard (dot = 1.2/WPM s);
// envelopes are linear power (any scale, ≥ 0). It never reads IQ: the
// receiver hands it demodulated audio and power tracks.
package morse

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"unicode/utf8"
)

// Mode says how the Morse keying reaches us.
type Mode int

const (
	// ModeAuto: decide from the signal (see DetectMode).
	ModeAuto Mode = iota
	// ModeFM: a keyed audio tone on an FM carrier (MCW on NBFM); decode the
	// FM discriminator audio.
	ModeFM
	// ModeAM: a keyed audio tone on an AM carrier (A2A); decode the AM
	// envelope audio.
	ModeAM
	// ModeCW: the carrier itself is keyed (A1A); decode the power track.
	ModeCW
)

var modeNames = [...]string{"auto", "fm", "am", "cw"}

// String returns the lower-case name used on the command line.
func (m Mode) String() string {
	if m < 0 || int(m) >= len(modeNames) {
		return fmt.Sprintf("mode(%d)", int(m))
	}
	return modeNames[m]
}

// ParseMode reads "auto", "fm", "am" or "cw" (case-insensitive).
func ParseMode(s string) (Mode, error) {
	t := strings.ToLower(strings.TrimSpace(s))
	for i, n := range modeNames {
		if t == n {
			return Mode(i), nil
		}
	}
	return ModeAuto, fmt.Errorf("unknown Morse mode %q: want auto, fm, am or cw", s)
}

// Mark is one interval of constant keying: key down (On) or key up.
type Mark struct {
	// On is true for key down (tone or carrier present).
	On bool
	// StartS and DurS are the interval's start (seconds from the start of
	// the burst audio) and length in seconds.
	StartS, DurS float64
	// Units is the interval's class in dot units: 1 or 3 for key down; 1
	// (inside a character), 3 (between characters) or 7 (between words)
	// for key up. Encode fills it with the ideal class; decoders with the
	// class they decided on.
	Units int
}

// ErrUnsendable is wrapped by errors about characters that Morse code
// cannot send.
var ErrUnsendable = errors.New("character has no Morse code")

// morseTable maps text (a character, or a prosign written "<AR>") to its
// code, '.' for a dot and '-' for a dash. Source: ITU-R M.1677-1 (10/2009)
// Annex 1 §1.1.1–1.1.3; prosigns are the usual
// run-together letter pairs (common practice).
var morseTable = map[string]string{
	"A": ".-", "B": "-...", "C": "-.-.", "D": "-..", "E": ".", "F": "..-.",
	"G": "--.", "H": "....", "I": "..", "J": ".---", "K": "-.-", "L": ".-..",
	"M": "--", "N": "-.", "O": "---", "P": ".--.", "Q": "--.-", "R": ".-.",
	"S": "...", "T": "-", "U": "..-", "V": "...-", "W": ".--", "X": "-..-",
	"Y": "-.--", "Z": "--..", "É": "..-..",
	"1": ".----", "2": "..---", "3": "...--", "4": "....-", "5": ".....",
	"6": "-....", "7": "--...", "8": "---..", "9": "----.", "0": "-----",
	".": ".-.-.-", ",": "--..--", ":": "---...", "?": "..--..", "'": ".----.",
	"-": "-....-", "/": "-..-.", "(": "-.--.", ")": "-.--.-", "\"": ".-..-.",
	"=": "-...-", "+": ".-.-.", "×": "-..-", "@": ".--.-.",
	// Prosigns (common practice). AR = "+", BT = "=", KN = "(" share codes.
	"<AR>": ".-.-.", "<SK>": "...-.-", "<BT>": "-...-", "<KN>": "-.--.",
	"<AS>": ".-...", "<SN>": "...-.", "<HH>": "........", "<CT>": "-.-.-",
}

// reverseTable maps a code to the text the decoder writes for it. Where
// two texts share a code, the choice is the one a beacon most likely means.
var reverseTable = func() map[string]string {
	r := map[string]string{}
	for t, c := range morseTable { // prosigns first ...
		if strings.HasPrefix(t, "<") {
			r[c] = t
		}
	}
	for t, c := range morseTable { // ... then single characters win
		if !strings.HasPrefix(t, "<") && t != "×" { // × shares X's code
			r[c] = t
		}
	}
	r[".-.-."] = "<AR>" // rather than "+"
	r["-.--."] = "<KN>" // rather than "("
	return r
}()

// maxCodeLen is the longest code in the table (the error signal).
const maxCodeLen = 8

// UnknownChar is written by the decoder for an element pattern that is no
// character; Morse cannot send '*', so it never collides with real text.
const UnknownChar = "*"

// splitMorseText splits text into table keys: single characters
// (upper-cased), prosigns in angle brackets, and " " for word breaks
// (runs of white space collapse to one). It names the first character
// that has no code.
func splitMorseText(text string) ([]string, error) {
	var out []string
	if !utf8.ValidString(text) {
		return nil, fmt.Errorf("invalid UTF-8: %w", ErrUnsendable)
	}
	s := strings.ToUpper(text)
	for i := 0; i < len(s); {
		r, n := utf8.DecodeRuneInString(s[i:])
		switch {
		case r == utf8.RuneError && n <= 1:
			return nil, fmt.Errorf("invalid UTF-8 at byte %d: %w", i, ErrUnsendable)
		case r == ' ' || r == '\t' || r == '\n' || r == '\r':
			if len(out) > 0 && out[len(out)-1] != " " {
				out = append(out, " ")
			}
			i += n
			continue
		case r == '<':
			j := strings.IndexByte(s[i:], '>')
			if j < 0 {
				return nil, fmt.Errorf("%q: unclosed prosign: %w", s[i:], ErrUnsendable)
			}
			ps := s[i : i+j+1]
			if _, ok := morseTable[ps]; !ok {
				return nil, fmt.Errorf("prosign %q: %w", ps, ErrUnsendable)
			}
			out = append(out, ps)
			i += j + 1
			continue
		}
		k := string(r)
		if _, ok := morseTable[k]; !ok {
			return nil, fmt.Errorf("%q: %w", k, ErrUnsendable)
		}
		out = append(out, k)
		i += n
	}
	for len(out) > 0 && out[len(out)-1] == " " {
		out = out[:len(out)-1]
	}
	return out, nil
}

// CanonicalText returns text as the decoder would print it after sending
// it: upper case, single spaces, shared codes written one way ("+" becomes
// "<AR>", "<BT>" becomes "=", "(" becomes "<KN>").
func CanonicalText(text string) (string, error) {
	toks, err := Tokens(text)
	if err != nil {
		return "", err
	}
	return strings.Join(toks, ""), nil
}

// Tokens splits text into the tokens the decoder writes (its Char.Text
// values): one per character, shared codes written one way as in
// CanonicalText, and " " for each word break. Errors name the first
// character Morse cannot send (wrapping ErrUnsendable).
func Tokens(text string) ([]string, error) {
	keys, err := splitMorseText(text)
	if err != nil {
		return nil, err
	}
	out := make([]string, len(keys))
	for i, k := range keys {
		if k == " " {
			out[i] = " "
			continue
		}
		out[i] = reverseTable[morseTable[k]]
	}
	return out, nil
}

// Code returns the dots and dashes (".-") of a token as Tokens or the
// decoder writes it, and false for anything else (UnknownChar, " ").
func Code(token string) (string, bool) {
	c, ok := morseTable[token]
	return c, ok
}

// DotSeconds is the dot length for a speed in words per minute by the
// PARIS standard (50 units a word): 1.2/wpm seconds.
func DotSeconds(wpm float64) float64 { return 1.2 / wpm }

// farnsworthGaps returns the gaps between characters and between words, in
// seconds, for character speed c and overall speed s (WPM), by Bloom's
// formula (QEX April 1990): ta = (60c − 37.2s)/(s·c), tc = 3ta/19,
// tw = 7ta/19. When s ≥ c the timing is standard (3 and 7 dots).
func farnsworthGaps(c, s float64) (charGapS, wordGapS float64) {
	u := DotSeconds(c)
	if s <= 0 || s >= c {
		return 3 * u, 7 * u
	}
	ta := (60*c - 37.2*s) / (s * c)
	return 3 * ta / 19, 7 * ta / 19
}

// Encode renders text as ideal keying: alternating key-down and key-up
// intervals starting and ending with key down (no leading or trailing
// silence). wpm is the character speed (dot = 1.2/wpm s, PARIS standard,
// ITU-R M.1677-1 ratios 1:3 and gaps 1, 3, 7). farnsworthWPM below wpm
// stretches the gaps between characters and words (Bloom's Farnsworth
// timing); 0 or ≥ wpm means standard timing. Text may hold letters,
// digits, the ITU punctuation and prosigns such as "<AR>"; anything else is
// an error naming the character.
func Encode(text string, wpm, farnsworthWPM float64) ([]Mark, error) {
	if !(wpm >= 1 && wpm <= 200) || math.IsNaN(farnsworthWPM) || farnsworthWPM < 0 {
		return nil, fmt.Errorf("encode %q: speed %g WPM (Farnsworth %g) out of range 1–200", text, wpm, farnsworthWPM)
	}
	keys, err := splitMorseText(text)
	if err != nil {
		return nil, fmt.Errorf("encode %q: %w", text, err)
	}
	u := DotSeconds(wpm)
	cg, wg := farnsworthGaps(wpm, farnsworthWPM)
	var marks []Mark
	t := 0.0
	add := func(on bool, d float64, units int) {
		marks = append(marks, Mark{On: on, StartS: t, DurS: d, Units: units})
		t += d
	}
	pendingGap := 0 // 0 none, 3 char, 7 word
	for _, k := range keys {
		if k == " " {
			pendingGap = 7
			continue
		}
		if len(marks) > 0 {
			if pendingGap == 7 {
				add(false, wg, 7)
			} else {
				add(false, cg, 3)
			}
		}
		pendingGap = 0
		for i, e := range morseTable[k] {
			if i > 0 {
				add(false, u, 1)
			}
			if e == '.' {
				add(true, u, 1)
			} else {
				add(true, 3*u, 3)
			}
		}
	}
	if len(marks) == 0 {
		return nil, fmt.Errorf("encode %q: nothing to send", text)
	}
	return marks, nil
}
