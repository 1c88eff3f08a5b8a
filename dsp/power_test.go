package dsp

import (
	"math"
	"testing"
)

func TestPowerMeterAndDBFS(t *testing.T) {
	// Full scale (common practice for complex baseband, documented here):
	// a complex sinusoid of amplitude 1 is 0 dBFS; amplitude 0.1 is −20 dBFS.
	cases := []struct {
		amp, wantDB float64
	}{{1, 0}, {0.1, -20}, {0.5, -6.0206}}
	for _, c := range cases {
		m := NewPowerMeter(100)
		x := tone(1050, 1234, 48000, c.amp, 0.3)
		var got []float32
		for i := 0; i < len(x); i += 37 { // streaming in odd blocks
			got = append(got, m.Process(nil, x[i:min(i+37, len(x))])...)
		}
		if len(got) != 10 {
			t.Fatalf("readings = %d, want 10", len(got))
		}
		for _, p := range got {
			if db := DBFS(float64(p)); math.Abs(db-c.wantDB) > 1e-3 {
				t.Errorf("amp %g: %.4f dBFS, want %.4f", c.amp, db, c.wantDB)
			}
		}
	}
	if DBFS(0) != -200 || DBFS(-1) != -200 || DBFS(1e-30) != -200 {
		t.Error("DBFS floor is not −200")
	}
}
