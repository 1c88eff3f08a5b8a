package morse

import (
	"errors"
	"math"
	"math/rand/v2"
	"nullseek/ident/internal/identtest"
	"nullseek/internal/testtool"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

var ebookCmd = regexp.MustCompile(`\|[a-zA-Z]\d+\s*`)

// TestDecodeCleanEbook2cw decodes the clean ebook2cw 0.8.4 files (made by
// testdata/morse/make_clean.sh) exactly, and reads back the speed, the
// Farnsworth speed and the pitch ebook2cw was given.
func TestDecodeCleanEbook2cw(t *testing.T) {
	rows := testtool.TSVRows(t, filepath.Join(identtest.MorseDir, "clean.tsv"))
	if len(rows) < 10 {
		t.Fatalf("only %d clean fixtures", len(rows))
	}
	for _, r := range rows {
		r := r
		t.Run(r["file"], func(t *testing.T) {
			a, rate, err := identtest.ReadWAV(filepath.Join(identtest.MorseDir, r["file"]))
			if err != nil {
				t.Fatal(err)
			}
			d, err := DecodeTone(a, rate, DecodeOptions{})
			if err != nil {
				t.Fatal(err)
			}
			want, _ := CanonicalText(ebookCmd.ReplaceAllString(r["text"], ""))
			if d.Text != want {
				t.Errorf("decoded %q, ebook2cw sent %q", d.Text, want)
			}
			wpm, eff, freq := identtest.Atof(t, r["wpm"]), identtest.Atof(t, r["effwpm"]), identtest.Atof(t, r["freq_hz"])
			if math.Abs(d.WPM-wpm) > 0.03*wpm {
				t.Errorf("speed %.2f WPM, ebook2cw -w %g", d.WPM, wpm)
			}
			if eff > 0 && math.Abs(d.FarnsworthWPM-eff) > 0.1*eff {
				t.Errorf("Farnsworth speed %.2f WPM, ebook2cw -e %g", d.FarnsworthWPM, eff)
			}
			if eff == 0 && math.Abs(d.FarnsworthWPM-d.WPM) > 0.05*d.WPM {
				t.Errorf("standard spacing read as Farnsworth %.2f WPM", d.FarnsworthWPM)
			}
			if strings.HasPrefix(r["file"], "clean") {
				// Pitch to ~1 Hz (ebook2cw -f).
				f, _, err := FindTone(a, rate)
				if err != nil || math.Abs(f-freq) > 1.0 {
					t.Errorf("FindTone %.2f Hz (%v), ebook2cw -f %g", f, err, freq)
				}
				for _, c := range d.Chars {
					if c.Confidence < 0.5 || c.Confidence > 1 || c.EndS <= c.StartS {
						t.Errorf("char %+v: implausible confidence or times on clean audio", c)
					}
				}
			}
		})
	}
}

// TestDecodeWanderingTone: ebook2cw moves the pitch 700→880 Hz in 60 Hz
// steps (|f commands). With tracking the text is exact; with the
// oscillator held at one pitch it is not, which shows the tracking works.
func TestDecodeWanderingTone(t *testing.T) {
	a, rate, err := identtest.ReadWAV(filepath.Join(identtest.MorseDir, "wander_w20_f700_880.wav"))
	if err != nil {
		t.Fatal(err)
	}
	d, err := DecodeTone(a, rate, DecodeOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if d.Text != "TEST TEST TEST TEST" {
		t.Errorf("tracked: %q", d.Text)
	}
	if len(d.Warnings) == 0 || !strings.Contains(d.Warnings[0], "wandered") {
		t.Errorf("want a warning about the wandering tone, got %v", d.Warnings)
	}
	fixed, err := DecodeTone(a, rate, DecodeOptions{FixedTone: true})
	if err == nil && fixed.Text == d.Text {
		t.Errorf("fixed oscillator also decoded %q: the test does not exercise tracking", fixed.Text)
	}
}

// powerFromAudio turns tone audio into a keyed-carrier power track: mean
// square over blocks, plus a constant noise floor.
func powerFromAudio(a []float32, rate, outRate float64, floor float32) []float32 {
	k := int(rate / outRate)
	p := make([]float32, len(a)/k)
	for i := range p {
		s := float32(0)
		for _, v := range a[i*k : i*k+k] {
			s += v * v
		}
		p[i] = s/float32(k) + floor
	}
	return p
}

// TestDecodeKeyed reads keyed-carrier CW from a power track made from the
// ebook2cw keying (power = mean square of its audio, 200/s, with a noise
// floor 20 dB down).
func TestDecodeKeyed(t *testing.T) {
	for _, f := range []string{"clean_w20_f1000.wav", "clean_w25_f600.wav", "clean_w10_f600.wav"} {
		a, rate, err := identtest.ReadWAV(filepath.Join(identtest.MorseDir, f))
		if err != nil {
			t.Fatal(err)
		}
		p := powerFromAudio(a, rate, 200, 0)
		var mx float32
		for _, v := range p {
			mx = max(mx, v)
		}
		for i := range p {
			p[i] += mx / 100
		}
		d, err := DecodeKeyed(p, 200, DecodeOptions{})
		if err != nil {
			t.Fatal(err)
		}
		want := map[string]string{"clean_w20_f1000.wav": "N0CALL/1", "clean_w25_f600.wav": "1234567890", "clean_w10_f600.wav": "TEST 73"}[f]
		if d.Text != want || d.Mode != ModeCW || d.ToneHz != 0 {
			t.Errorf("%s: %q mode %v tone %g; want %q", f, d.Text, d.Mode, d.ToneHz, want)
		}
	}
	if _, err := DecodeKeyed(make([]float32, 100), 20, DecodeOptions{}); err == nil {
		t.Error("20 readings a second: want an error")
	}
}

func TestDetectMode(t *testing.T) {
	fm, rate, err := identtest.ReadWAV(filepath.Join(identtest.MorseDir, "fm", "cer_cnr12_a.wav"))
	if err != nil {
		t.Fatal(err)
	}
	r := rand.New(rand.NewPCG(1, 2))
	noise := make([]float32, len(fm))
	for i := range noise {
		noise[i] = float32(0.1 * r.NormFloat64())
	}
	flat := make([]float32, 2000)
	for i := range flat {
		flat[i] = 1 + float32(0.01*r.NormFloat64())
	}
	power := powerFromAudio(fm, rate, 200, 0.01) // FM: keyed tone, not keyed power
	_ = power
	clean, crate, _ := identtest.ReadWAV(filepath.Join(identtest.MorseDir, "clean_w20_f1000.wav"))
	keyed := powerFromAudio(clean, crate, 200, 0.001)
	for _, tc := range []struct {
		name   string
		fm, am []float32
		pw     []float32
		want   Mode
	}{
		{"tone in FM audio", fm, noise, flat, ModeFM},
		{"tone in AM envelope", noise, fm, flat, ModeAM},
		{"keyed power", noise, noise, keyed, ModeCW},
		{"nothing", noise, noise, flat, ModeAuto},
		{"no inputs", nil, nil, nil, ModeAuto},
	} {
		if got := DetectMode(tc.fm, tc.am, rate, tc.pw, 200); got != tc.want {
			t.Errorf("%s: %v, want %v", tc.name, got, tc.want)
		}
	}
}

func TestFindToneNoTone(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	noise := make([]float32, 24000)
	for i := range noise {
		noise[i] = float32(r.NormFloat64())
	}
	for _, tc := range []struct {
		name string
		a    []float32
		rate float64
	}{
		{"white noise", noise, 8000},
		{"silence", make([]float32, 8000), 8000},
		{"too short", noise[:100], 8000},
		{"nil", nil, 8000},
	} {
		_, _, err := FindTone(tc.a, tc.rate)
		if !errors.Is(err, ErrNoTone) {
			t.Errorf("%s: %v, want ErrNoTone", tc.name, err)
		}
		if _, err := DecodeTone(tc.a, tc.rate, DecodeOptions{}); !errors.Is(err, ErrNoTone) {
			t.Errorf("DecodeTone %s: %v, want ErrNoTone", tc.name, err)
		}
	}
	if _, _, err := FindTone(noise, math.NaN()); err == nil {
		t.Error("NaN rate: want an error")
	}
}

func TestDecodeEnvelopeBadInput(t *testing.T) {
	nan := make([]float32, 1000)
	for i := range nan {
		nan[i] = float32(math.NaN())
	}
	for _, tc := range []struct {
		name string
		env  []float32
		rate float64
	}{
		{"empty", nil, 400},
		{"constant", make([]float32, 4000), 400},
		{"NaN", nan, 400},
		{"rate too low", make([]float32, 100), 10},
		{"one sample", []float32{1}, 400},
	} {
		if _, err := DecodeEnvelope(tc.env, tc.rate, DecodeOptions{}); err == nil {
			t.Errorf("%s: want an error", tc.name)
		}
	}
}

// FuzzDecodeEnvelope feeds random envelopes to the decoder: no panic, and
// any result must be well formed.
func FuzzDecodeEnvelope(f *testing.F) {
	f.Add([]byte{0, 255, 255, 0, 255, 0, 0, 0, 255, 255, 255, 0}, uint8(4))
	f.Add([]byte("some random bytes that make an envelope"), uint8(1))
	f.Add(make([]byte, 64), uint8(10))
	f.Fuzz(func(t *testing.T, b []byte, stretch uint8) {
		k := int(stretch%16) + 1
		env := make([]float32, 0, len(b)*k)
		for _, v := range b {
			for j := 0; j < k; j++ {
				env = append(env, float32(v)/255)
			}
		}
		d, err := DecodeEnvelope(env, 400, DecodeOptions{})
		if err != nil {
			return
		}
		for _, c := range d.Chars {
			if c.Text != UnknownChar {
				if _, ok := morseTable[c.Text]; !ok {
					t.Fatalf("decoded %q is not in the table", c.Text)
				}
			}
			if !(c.Confidence >= 0 && c.Confidence <= 1) {
				t.Fatalf("confidence %g", c.Confidence)
			}
		}
		if !(d.WPM >= 4 && d.WPM <= 50) {
			t.Fatalf("speed %g WPM outside the search range", d.WPM)
		}
	})
}
