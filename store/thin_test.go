package store

import (
	"bytes"
	"encoding/json"
	"errors"
	"math"
	"math/rand"
	"os/exec"
	"reflect"
	"testing"

	"nullseek/internal/testtool"
)

// thinInput is a seeded reading track at about 200 readings a second with
// jittered sample positions, levels over 60 dB and a few clipped readings.
func thinInput(n int, seed int64) []LevelReading {
	rng := rand.New(rand.NewSource(seed))
	const rate = 2.048e6
	out := make([]LevelReading, n)
	for i := range out {
		s := int64(i)*10240 + int64(rng.Intn(4000)) - 2000 + 5_000_000
		clip := 0
		if rng.Float64() < 0.05 {
			clip = 1 + rng.Intn(30)
		}
		out[i] = LevelReading{Sample: s, TimeS: float64(s) / rate, LevelDBFS: -80 + 60*rng.Float64(), Clipped: clip}
	}
	return out
}

// TestThinLevelsAgainstNumpy: ThinLevels against testdata/store/thin_ref.py,
// an independent numpy (Debian python3-numpy) implementation of the rule
// its doc comment states.
func TestThinLevelsAgainstNumpy(t *testing.T) {
	py := testtool.Python(t, "numpy")
	const rate, perS = 2.048e6, 40.0
	in := thinInput(3000, 1)
	got, err := ThinLevels(in, rate, perS)
	if err != nil {
		t.Fatal(err)
	}
	rows := make([][4]float64, len(in))
	for i, r := range in {
		rows[i] = [4]float64{float64(r.Sample), r.TimeS, r.LevelDBFS, float64(r.Clipped)}
	}
	req, _ := json.Marshal(map[string]any{"rate": rate, "per_s": perS, "readings": rows})
	cmd := exec.Command(py, "../testdata/store/thin_ref.py")
	cmd.Stdin = bytes.NewReader(req)
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("thin_ref.py: %v", err)
	}
	var want [][4]float64
	if err := json.Unmarshal(out, &want); err != nil {
		t.Fatal(err)
	}
	if len(got) != len(want) {
		t.Fatalf("%d thinned readings, numpy reference %d", len(got), len(want))
	}
	// 3000 readings over 15 s at 40/s: about 600 windows.
	if len(got) < 590 || len(got) > 610 {
		t.Errorf("%d readings from 15 s at 40/s", len(got))
	}
	for i, g := range got {
		w := want[i]
		if float64(g.Sample) != w[0] || math.Abs(g.TimeS-w[1]) > 1e-12 || math.Abs(g.LevelDBFS-w[2]) > 1e-9 || float64(g.Clipped) != w[3] {
			t.Fatalf("window %d: %+v, numpy %v", i, g, w)
		}
	}
	// Thinning again at the same rate changes nothing: the natural key
	// (burst, sample) is stable across re-runs.
	again, err := ThinLevels(got, rate, perS)
	if err != nil || !reflect.DeepEqual(again, got) {
		t.Errorf("thinning a thinned track changed it (%v)", err)
	}
}

func TestThinLevelsEdges(t *testing.T) {
	in := thinInput(50, 2)
	// No denser than asked: unchanged.
	if got, err := ThinLevels(in, 2.048e6, 1e6); err != nil || !reflect.DeepEqual(got, in) {
		t.Errorf("rate above the input's: changed (%v)", err)
	}
	if got, err := ThinLevels(nil, 2.048e6, 40); err != nil || len(got) != 0 {
		t.Errorf("empty input: %v %v", got, err)
	}
	d, err := ThinLevels(in, 2.048e6, 0)
	if err != nil {
		t.Fatal(err)
	}
	if want, _ := ThinLevels(in, 2.048e6, DefaultReadingsPerS); !reflect.DeepEqual(d, want) {
		t.Errorf("perS 0 is not the default")
	}
	for name, bad := range map[string]func() ([]LevelReading, error){
		"rate 0":   func() ([]LevelReading, error) { return ThinLevels(in, 0, 40) },
		"rate NaN": func() ([]LevelReading, error) { return ThinLevels(in, math.NaN(), 40) },
		"perS Inf": func() ([]LevelReading, error) { return ThinLevels(in, 2e6, math.Inf(1)) },
		"repeat": func() ([]LevelReading, error) {
			x := append([]LevelReading(nil), in...)
			x[5].Sample = x[4].Sample
			return ThinLevels(x, 2e6, 40)
		},
	} {
		if _, err := bad(); !errors.Is(err, ErrBadRow) {
			t.Errorf("%s: %v", name, err)
		}
	}
}

// TestWholeWindows: at 240 kS/s and 40 readings a second the windows are
// 6000 samples (k·6000 … k·6000+5999); the bounds keep exactly the
// windows inside [start, end], and a thinned track cut to them holds no
// window that reached outside.
func TestWholeWindows(t *testing.T) {
	for _, c := range []struct{ start, end, from, through int64 }{
		{6000, 23999, 6000, 23999},
		{6001, 23999, 12000, 23999},
		{6000, 23998, 6000, 17999},
		{5999, 12000, 6000, 11999},
		{6001, 11999, 12000, 11999}, // no whole window
	} {
		from, through := WholeWindows(c.start, c.end, 240000, 40)
		if from != c.from || through != c.through {
			t.Errorf("WholeWindows(%d, %d) = %d, %d; want %d, %d", c.start, c.end, from, through, c.from, c.through)
		}
	}
	if w := ThinWindow(240000, 0); w != 6000 {
		t.Errorf("ThinWindow at the default rate = %d, want 6000", w)
	}
	if w := ThinWindow(100, 400); w != 1 {
		t.Errorf("ThinWindow above the sample rate = %d, want 1", w)
	}
}
