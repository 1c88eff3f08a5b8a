package dsp

import (
	"math"
	"testing"
)

func TestDBFS(t *testing.T) {
	// Full scale (common practice for complex baseband, documented here):
	// a complex sinusoid of amplitude 1 is 0 dBFS; amplitude 0.1 is −20 dBFS.
	cases := []struct {
		amp, wantDB float64
	}{{1, 0}, {0.1, -20}, {0.5, -6.0206}}
	for _, c := range cases {
		x := tone(1050, 1234, 48000, c.amp, 0.3)
		for i := 0; i+100 <= len(x); i += 100 { // mean |x|² over blocks of 100
			var p float64
			for _, v := range x[i : i+100] {
				p += float64(real(v))*float64(real(v)) + float64(imag(v))*float64(imag(v))
			}
			if db := DBFS(p / 100); math.Abs(db-c.wantDB) > 1e-3 {
				t.Errorf("amp %g: %.4f dBFS, want %.4f", c.amp, db, c.wantDB)
			}
		}
	}
	if DBFS(0) != -200 || DBFS(-1) != -200 || DBFS(1e-30) != -200 {
		t.Error("DBFS floor is not −200")
	}
}
