package bearing

import (
	"math"
	"path/filepath"
	"strings"
	"testing"
)

func TestPatternShapes(t *testing.T) {
	loop, _ := SmallLoop(25)
	loop40, _ := SmallLoop(40)
	yagi, _ := Yagi(60, 18)
	yagi30, _ := Yagi(30, 15)
	body, _ := BodyShield(12)
	cases := []struct {
		name string
		p    Pattern
		// expected features
		nulls    []int   // table indices of minima (deg)
		depthDB  float64 // max − min
		widthDeg float64 // Peak: −3 dB beamwidth (0 = skip)
		fbDB     float64 // Peak: G(0) − G(180) (0 = skip)
		symmetry int
		mode     Mode
		source   string
	}{
		// FCC pool G9D10 (nulls broadside to the loop plane) and E9H05 (bidirectional
		// null → two nulls 180° apart); depth as parameterised.
		{"loop25", loop, []int{0, 180}, 25, 0, 0, 2, Null, "FCC G9D10, E9H05"},
		{"loop40", loop40, []int{0, 180}, 40, 0, 0, 2, Null, "FCC G9D10, E9H05"},
		// Gaussian main lobe −12(δ/θ₃)² dB (common practice): −3 dB at ±θ₃/2.
		{"yagi60", yagi, []int{}, 0, 60, 18, 1, Peak, "common practice"},
		{"yagi30", yagi30, []int{}, 0, 30, 15, 1, Peak, "common practice"},
		// Body shielding: drop with the back to the transmitter (common practice, from memory).
		{"body12", body, []int{180}, 12, 0, 0, 1, Null, "common practice (from memory)"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if err := c.p.Validate(); err != nil {
				t.Fatal(err)
			}
			if c.p.Symmetry != c.symmetry || c.p.Mode != c.mode {
				t.Errorf("symmetry/mode %d/%v, want %d/%v", c.p.Symmetry, c.p.Mode, c.symmetry, c.mode)
			}
			mx, mn := math.Inf(-1), math.Inf(1)
			for _, g := range c.p.GainDB {
				mx, mn = math.Max(mx, g), math.Min(mn, g)
			}
			if math.Abs(mx) > 1e-9 {
				t.Errorf("max %.3g dB, want 0 (%s)", mx, c.source)
			}
			if c.depthDB > 0 && math.Abs(mx-mn-c.depthDB) > 0.01 {
				t.Errorf("depth %.3f dB, want %.1f (%s)", mx-mn, c.depthDB, c.source)
			}
			for _, k := range c.nulls {
				if math.Abs(c.p.GainDB[k]-mn) > 1e-9 {
					t.Errorf("gain at %d° = %.2f dB, not the null %.2f dB (%s)", k, c.p.GainDB[k], mn, c.source)
				}
				for _, d := range []int{-1, 1} {
					if c.p.GainDB[(k+d+360)%360] <= c.p.GainDB[k] {
						t.Errorf("no local minimum at %d° (%s)", k, c.source)
					}
				}
			}
			if c.widthDeg > 0 {
				if w := c.p.WidthDeg(); math.Abs(w-c.widthDeg) > 0.1 {
					t.Errorf("−3 dB beamwidth %.2f°, want %.0f° (%s)", w, c.widthDeg, c.source)
				}
			}
			if c.fbDB > 0 {
				if fb := c.p.GainDB[0] - c.p.GainDB[180]; math.Abs(fb-c.fbDB) > 0.01 {
					t.Errorf("front-to-back %.3f dB, want %.0f (%s)", fb, c.fbDB, c.source)
				}
			}
		})
	}
}

func TestPatternConstructorErrors(t *testing.T) {
	cases := []struct {
		name string
		f    func() (Pattern, error)
	}{
		{"loop0", func() (Pattern, error) { return SmallLoop(0) }},
		{"loopNaN", func() (Pattern, error) { return SmallLoop(math.NaN()) }},
		{"loop200", func() (Pattern, error) { return SmallLoop(200) }},
		{"yagiNarrow", func() (Pattern, error) { return Yagi(1, 15) }},
		{"yagiFB", func() (Pattern, error) { return Yagi(60, 0) }},
		{"body0", func() (Pattern, error) { return BodyShield(-1) }},
	}
	for _, c := range cases {
		if _, err := c.f(); err == nil {
			t.Errorf("%s: no error", c.name)
		}
	}
}

func TestPatternJSONRoundTrip(t *testing.T) {
	dir := t.TempDir()
	for _, mk := range []func() (Pattern, error){
		func() (Pattern, error) { return SmallLoop(28) },
		func() (Pattern, error) { return Yagi(45, 16) },
		func() (Pattern, error) { return BodyShield(9) },
	} {
		p, err := mk()
		if err != nil {
			t.Fatal(err)
		}
		path := filepath.Join(dir, "p.json")
		if err := SavePattern(path, p); err != nil {
			t.Fatal(err)
		}
		q, err := LoadPattern(path)
		if err != nil {
			t.Fatal(err)
		}
		if q.Name != p.Name || q.Mode != p.Mode || q.Symmetry != p.Symmetry {
			t.Errorf("header changed: %+v", q)
		}
		for k := range p.GainDB {
			if q.GainDB[k] != p.GainDB[k] {
				t.Fatalf("%s: gain %d changed %v → %v", p.Name, k, p.GainDB[k], q.GainDB[k])
			}
		}
	}
}

func TestParsePatternErrors(t *testing.T) {
	good, _ := SmallLoop(20)
	b, _ := MarshalPattern(good)
	s := string(b)
	cases := []struct{ name, in, want string }{
		{"notjson", "{", "pattern JSON"},
		{"format", strings.Replace(s, "nullseek-antenna-pattern", "other", 1), "format"},
		{"version", strings.Replace(s, `"version": 2`, `"version": 9`, 1), "version"},
		{"mode", strings.Replace(s, `"mode": "null"`, `"mode": "dip"`, 1), "mode"},
		{"symmetry", strings.Replace(s, `"symmetry": 2`, `"symmetry": 7`, 1), "symmetry"},
		{"step", strings.Replace(s, `"step_deg": 1`, `"step_deg": 2`, 1), "step_deg"},
		{"short", `{"format":"nullseek-antenna-pattern","version":1,"mode":"peak","symmetry":1,"step_deg":1,"gain_db":[0,-1]}`, "gain values"},
	}
	for _, c := range cases {
		_, err := ParsePattern([]byte(c.in))
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v, want it to mention %q", c.name, err, c.want)
		}
	}
	if _, err := ParsePattern(b); err != nil {
		t.Errorf("good pattern: %v", err)
	}
}

func FuzzParsePattern(f *testing.F) {
	good, _ := Yagi(50, 15)
	b, _ := MarshalPattern(good)
	f.Add(b)
	f.Add([]byte(`{"format":"nullseek-antenna-pattern","version":1}`))
	f.Add([]byte(`[]`))
	f.Fuzz(func(t *testing.T, data []byte) {
		p, err := ParsePattern(data)
		if err != nil {
			return
		}
		if err := p.Validate(); err != nil {
			t.Fatalf("parsed pattern does not validate: %v", err)
		}
		if _, err := MarshalPattern(p); err != nil {
			t.Fatalf("re-marshal: %v", err)
		}
	})
}

// TestCRBWorkedExample: worked example of the CRBDBDeg bound (derived for
// this project) — Gaussian main lobe
// θ₃ = 60°, σ = 1 dB, 13 samples at 5° steps over ±30° → σ_θ ≥ 2.2°.
func TestCRBWorkedExample(t *testing.T) {
	p, err := Yagi(60, 40)
	if err != nil {
		t.Fatal(err)
	}
	var h []float64
	for d := -30.0; d <= 30; d += 5 {
		h = append(h, 100+d)
	}
	got, err := CRBDBDeg(p, h, 100, 1)
	if err != nil {
		t.Fatal(err)
	}
	// The tabulated Yagi adds a back lobe and floor 55 dB down, and 1° table
	// interpolation; both are negligible on the main lobe.
	if math.Abs(got-2.2) > 0.05 {
		t.Errorf("CRB %.3f°, want 2.2° (CRBDBDeg worked example)", got)
	}
}
