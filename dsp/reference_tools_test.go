package dsp

import (
	"encoding/json"
	"math"
	"nullseek/internal/testtool"
	"os"
	"os/exec"
	"path/filepath"
	"testing"
)

// The committed fixtures are reproduced by their scripts with the installed
// reference tools (scipy 1.10, GNU Radio 3.10).
func TestFixturesReproduce(t *testing.T) {
	if testing.Short() {
		t.Skip("runs Python reference tools")
	}
	py := testtool.Python(t, "scipy, numpy, gnuradio.analog")
	src, err := filepath.Abs(filepath.Join("..", "testdata", "dsp"))
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	for _, script := range []string{"make_quad_demod_ref.py", "make_spectrum_ref.py"} {
		cmd := exec.Command(py, filepath.Join(src, script))
		cmd.Dir = dir
		if out, err := cmd.CombinedOutput(); err != nil {
			t.Fatalf("%s: %v\n%s", script, err, out)
		}
	}
	out, err := exec.Command(py, filepath.Join(src, "make_filter_refs.py")).Output()
	if err != nil {
		t.Fatalf("make_filter_refs.py: %v", err)
	}
	if err := os.WriteFile(filepath.Join(dir, "filter_refs.json"), out, 0o644); err != nil {
		t.Fatal(err)
	}
	// binary float fixtures: equal to 1e-6 (SIMD kernels may differ per CPU)
	for _, name := range []string{"quad_demod_in.cf32", "quad_demod_out.f32", "spectrum_in.cf32"} {
		a := decodeF32(readFixture(t, name))
		b, err := os.ReadFile(filepath.Join(dir, name))
		if err != nil {
			t.Fatal(err)
		}
		bb := decodeF32(b)
		if len(a) != len(bb) {
			t.Fatalf("%s: %d values regenerated, %d committed", name, len(bb), len(a))
		}
		for i := range a {
			if math.Abs(float64(a[i]-bb[i])) > 1e-6 {
				t.Fatalf("%s[%d]: regenerated %g, committed %g", name, i, bb[i], a[i])
			}
		}
	}
	for _, name := range []string{"filter_refs.json", "spectrum_ref.json"} {
		var a, b any
		if err := json.Unmarshal(readFixture(t, name), &a); err != nil {
			t.Fatal(err)
		}
		raw, _ := os.ReadFile(filepath.Join(dir, name))
		if err := json.Unmarshal(raw, &b); err != nil {
			t.Fatalf("%s regenerated: %v", name, err)
		}
		if d := jsonDiff(a, b); d != "" {
			t.Errorf("%s: regenerated differs: %s", name, d)
		}
	}
}

// jsonDiff compares decoded JSON with a relative tolerance on numbers.
func jsonDiff(a, b any) string {
	switch av := a.(type) {
	case float64:
		bv, ok := b.(float64)
		if !ok || math.Abs(av-bv) > 1e-12*math.Max(1, math.Abs(av)) {
			return "number differs"
		}
	case []any:
		bv, ok := b.([]any)
		if !ok || len(av) != len(bv) {
			return "array length differs"
		}
		for i := range av {
			if d := jsonDiff(av[i], bv[i]); d != "" {
				return d
			}
		}
	case map[string]any:
		bv, ok := b.(map[string]any)
		if !ok || len(av) != len(bv) {
			return "object keys differ"
		}
		for k := range av {
			if d := jsonDiff(av[k], bv[k]); d != "" {
				return k + ": " + d
			}
		}
	default:
		if a != b {
			return "value differs"
		}
	}
	return ""
}
