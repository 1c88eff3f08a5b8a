package survey

import (
	"math"
	"math/rand"
	"nullseek/internal/angle"
	"strings"
	"testing"

	"nullseek/bearing"
	"nullseek/heading"
	"nullseek/receiver"
)

// mustPattern panics on a constructor error: the arguments are constants
// inside the constructors' documented ranges.
func mustPattern(p bearing.Pattern, err error) bearing.Pattern {
	if err != nil {
		panic(err)
	}
	return p
}

// sweepRecord makes a burst whose level follows pattern real at the true
// bearing while the antenna turns at rateDegS from startDeg, and the track
// a sensor reading offsetDeg low would give.
func sweepRecord(t *testing.T, real bearing.Pattern, ident string, bearingDeg, startDeg, rateDegS, durS, offsetDeg float64, seed int64) (Record, *heading.Track) {
	t.Helper()
	rng := rand.New(rand.NewSource(seed))
	r := Record{Ident: ident, Transmitter: "T" + ident}
	r.NoiseDB = -60
	for i := 0; i*10 <= int(durS*1000); i++ {
		ts := float64(i) / 100
		h := startDeg + rateDegS*ts
		g := gainAt(real, bearingDeg-h)
		pw := math.Pow(10, (-20+g)/10) + math.Pow(10, -60.0/10)
		lvl := 10*math.Log10(pw) + rng.NormFloat64()*0.3
		r.Level = append(r.Level, receiver.LevelSample{T: ts, LevelDB: lvl})
	}
	st := heading.SteadyTurn{StartDeg: startDeg - offsetDeg, RateDegPerS: rateDegS}
	tr, err := st.Track(-1, durS+1, 20)
	if err != nil {
		t.Fatal(err)
	}
	return r, tr
}

// gainAt interpolates a pattern's table linearly in dB.
func gainAt(p bearing.Pattern, x float64) float64 {
	x = angle.Wrap360(x)
	i := int(x)
	f := x - float64(i)
	return p.GainDB[i%360]*(1-f) + p.GainDB[(i+1)%360]*f
}

// TestCalibrateSynthetic: an invented sweep with a known sensor error and a
// real pattern unlike the nominal one; the offset comes back, the measured
// pattern has the real one's shape, and the choice of transmitter works.
func TestCalibrateSynthetic(t *testing.T) {
	real := mustPattern(bearing.Yagi(40, 14))
	nominal := mustPattern(bearing.Yagi(60, 18))
	loopReal := mustPattern(bearing.SmallLoop(20))
	loopNom := mustPattern(bearing.SmallLoop(25))
	cases := []struct {
		name          string
		real, nominal bearing.Pattern
		bearing, off  float64
		rate          float64
	}{
		{"yagi", real, nominal, 57.25, -4.6, 30},
		{"yagi ccw", real, nominal, 301.5, 11.2, -25},
		{"loop", loopReal, loopNom, 140, 3.3, 30},
		{"body", mustPattern(bearing.BodyShield(9)), mustPattern(bearing.BodyShield(12)), 222, -6.5, 20},
	}
	for _, c := range cases {
		rec, tr := sweepRecord(t, c.real, "N0CALL/1", c.bearing, 10, c.rate, 380/math.Abs(c.rate), c.off, 5)
		res := &Result{Records: []Record{rec}}
		cal, err := Calibrate(res, tr, c.nominal, c.bearing, CalibrationOptions{})
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		t.Logf("%s: offset %+.3f° ± %.3f° (truth %+.2f°), alignment with the nominal pattern %+.3f° off", c.name, cal.NorthOffsetDeg, cal.SigmaDeg, c.off, angle.Wrap180(c.bearing-cal.Alignment.BearingDeg-c.off))
		if d := cal.NorthOffsetDeg - c.off; math.Abs(d) > 0.2 || math.Abs(d) > 5*cal.SigmaDeg+0.05 {
			t.Errorf("%s: offset %.3f° ± %.3f°, truth %.2f°", c.name, cal.NorthOffsetDeg, cal.SigmaDeg, c.off)
		}
		want, got := bearing.Shape(c.real), bearing.Shape(cal.Pattern)
		if math.Abs(want.WidthDeg-got.WidthDeg) > 2 || math.Abs(want.FrontBackDB-got.FrontBackDB) > 1 || math.Abs(want.NullDepthDB-got.NullDepthDB) > 2 {
			t.Errorf("%s: measured shape %+v, real %+v", c.name, got, want)
		}
		if cal.Bursts != 1 || cal.Points < 1000 {
			t.Errorf("%s: used %d bursts, %d points", c.name, cal.Bursts, cal.Points)
		}
	}
}

func TestCalibrateChoosesTransmitter(t *testing.T) {
	real := mustPattern(bearing.Yagi(50, 15))
	a, tr := sweepRecord(t, real, "N0CALL/1", 80, 0, 30, 13, 2, 1)
	b, _ := sweepRecord(t, real, "N0CALL/2", 200, 30*14, 30, 13, 2, 2) // heading continues from a
	for i := range b.Level {
		b.Level[i].T += 14
	}
	tr2 := heading.SteadyTurn{StartDeg: -2, RateDegPerS: 30}
	tr, err := tr2.Track(-1, 30, 20)
	if err != nil {
		t.Fatal(err)
	}
	res := &Result{Records: []Record{a, b}}
	if _, err := Calibrate(res, tr, real, 80, CalibrationOptions{}); err == nil || !strings.Contains(err.Error(), "--ident") || !strings.Contains(err.Error(), "N0CALL/2") {
		t.Errorf("two transmitters without a choice: %v", err)
	}
	if _, err := Calibrate(res, tr, real, 80, CalibrationOptions{Ident: "N0CALL/9"}); err == nil || !strings.Contains(err.Error(), "not heard") {
		t.Errorf("unheard transmitter: %v", err)
	}
	for _, id := range []string{"n0call/2", "TN0CALL/2"} {
		cal, err := Calibrate(res, tr, real, 200, CalibrationOptions{Ident: id})
		if err != nil {
			t.Fatalf("ident %s: %v", id, err)
		}
		if cal.Ident != "N0CALL/2" || math.Abs(cal.NorthOffsetDeg-2) > 0.2 {
			t.Errorf("ident %s: calibrated on %s, offset %.2f°", id, cal.Ident, cal.NorthOffsetDeg)
		}
	}
	// A sweep that does not go round is refused.
	short, str := sweepRecord(t, real, "N0CALL/1", 80, 0, 30, 6, 0, 3)
	if _, err := Calibrate(&Result{Records: []Record{short}}, str, real, 80, CalibrationOptions{}); err == nil || !strings.Contains(err.Error(), "covers too little") {
		t.Errorf("half a turn: %v", err)
	}
	if _, err := Calibrate(&Result{}, str, real, 80, CalibrationOptions{}); err == nil {
		t.Error("no bursts: no error")
	}
	if _, err := Calibrate(res, tr, real, math.NaN(), CalibrationOptions{Ident: "N0CALL/1"}); err == nil {
		t.Error("NaN bearing: no error")
	}
}
