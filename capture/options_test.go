package capture

import (
	"bytes"
	"math"
	"net"
	"strings"
	"testing"
	"time"

	"nullseek/heading"
)

func TestParseSweep(t *testing.T) {
	cases := []struct {
		sweep, step string
		ok          bool
		from, to    float64
		stepDeg     float64
		dwell       time.Duration
	}{
		{"0:150", "", true, 0, 150, 0, 0},
		{"350:370", "", true, 350, 370, 0, 0},
		{"-90:90", "", true, -90, 90, 0, 0},
		{"", "0:10:90:1.5", true, 0, 90, 10, 1500 * time.Millisecond},
		{"", "90:-15:0:0", true, 90, 0, -15, 0},
		{"0:150", "0:10:90:1", false, 0, 0, 0, 0},
		{"0", "", false, 0, 0, 0, 0},
		{"0:x", "", false, 0, 0, 0, 0},
		{"10:10", "", false, 0, 0, 0, 0},
		{"NaN:10", "", false, 0, 0, 0, 0},
		{"", "0:0:90:1", false, 0, 0, 0, 0},
		{"", "0:10:90:-1", false, 0, 0, 0, 0},
		{"", "0:-10:90:1", false, 0, 0, 0, 0},
		{"", "0:10:90:3601", false, 0, 0, 0, 0},
	}
	for _, c := range cases {
		p, err := ParseSweep(c.sweep, c.step)
		if (err == nil) != c.ok {
			t.Errorf("ParseSweep(%q, %q) error %v, want ok=%v", c.sweep, c.step, err, c.ok)
			continue
		}
		if c.ok && (p.FromDeg != c.from || p.ToDeg != c.to || p.StepDeg != c.stepDeg || p.Dwell != c.dwell) {
			t.Errorf("ParseSweep(%q, %q) = %+v", c.sweep, c.step, p)
		}
	}
	// Neither flag: no plan, and Validate asks for one with a rotator.
	if p, err := ParseSweep("", ""); p != nil || err != nil {
		t.Errorf("ParseSweep of nothing = %v, %v; want no plan", p, err)
	}
	o := testOptions(250000)
	o.Rotator = "127.0.0.1:4533"
	if err := o.Validate(); err == nil || !strings.Contains(err.Error(), "--sweep") {
		t.Errorf("rotator without a plan: %v", err)
	}
}

func FuzzParseSweep(f *testing.F) {
	for _, s := range [][2]string{{"0:150", ""}, {"", "0:10:90:1"}, {"a:b", ""}, {"", "1:2:3"}, {"1e308:-1e308", ""}} {
		f.Add(s[0], s[1])
	}
	f.Fuzz(func(t *testing.T, sweep, step string) {
		p, err := ParseSweep(sweep, step)
		if err == nil && p != nil {
			if p.Check() != nil || p.FromDeg == p.ToDeg {
				t.Fatalf("accepted a plan that does not check: %+v", p)
			}
		}
	})
}

func TestSweepPlanCheck(t *testing.T) {
	cases := []struct {
		p  SweepPlan
		ok bool
	}{
		{SweepPlan{FromDeg: 0, ToDeg: 150}, true},
		{SweepPlan{FromDeg: 350, ToDeg: 370}, true},
		{SweepPlan{FromDeg: 90, ToDeg: 0, StepDeg: -10, Dwell: time.Second}, true},
		{SweepPlan{FromDeg: 10, ToDeg: 10}, false},
		{SweepPlan{FromDeg: 0, ToDeg: 90, StepDeg: -10}, false},
		{SweepPlan{FromDeg: 0, ToDeg: 90, StepDeg: 10, Dwell: -time.Second}, false},
		{SweepPlan{FromDeg: 0, ToDeg: 90, StepDeg: 10, Dwell: 2 * time.Hour}, false},
		{SweepPlan{FromDeg: math.NaN(), ToDeg: 90}, false},
		{SweepPlan{FromDeg: 0, ToDeg: math.Inf(1)}, false},
	}
	for _, c := range cases {
		if err := c.p.Check(); (err == nil) != c.ok {
			t.Errorf("%+v: %v, want ok=%v", c.p, err, c.ok)
		}
	}
}

func TestParseCompassAddr(t *testing.T) {
	cases := []struct {
		in      string
		ok      bool
		network string
		target  string
		baud    int
	}{
		{"tcp://127.0.0.1:10110", true, "tcp", "tcp://127.0.0.1:10110", 0},
		{"TCP://compass.local:2000/", true, "tcp", "tcp://compass.local:2000", 0},
		{"tcp://[::1]:10110", true, "tcp", "tcp://[::1]:10110", 0},
		{"udp://:10110", true, "udp", "udp://:10110", 0},
		{"udp://0.0.0.0:10110", true, "udp", "udp://0.0.0.0:10110", 0},
		// 4800 baud: NMEA 0183's standard rate (gpsfake -s default).
		{"serial:/dev/ttyUSB0", true, "serial", "/dev/ttyUSB0", 4800},
		{"serial:/dev/ttyS1@38400", true, "serial", "/dev/ttyS1", 38400},
		{"serial:///dev/ttyACM0@9600", true, "serial", "/dev/ttyACM0", 9600},
		{"serial:COM3@4800", true, "serial", "COM3", 4800},
		{"tcp://:10110", false, "", "", 0},
		{"tcp://host", false, "", "", 0},
		{"tcp:host:1", false, "", "", 0},
		{"tcp://host:0", false, "", "", 0},
		{"tcp://host:70000", false, "", "", 0},
		{"udp://host:x", false, "", "", 0},
		{"serial:", false, "", "", 0},
		{"serial:@4800", false, "", "", 0},
		{"serial:/dev/ttyUSB0@0", false, "", "", 0},
		{"serial:/dev/ttyUSB0@-9600", false, "", "", 0},
		{"/dev/ttyUSB0", false, "", "", 0},
		{"127.0.0.1:10110", false, "", "", 0},
		{"", false, "", "", 0},
	}
	for _, c := range cases {
		a, err := ParseCompassAddr(c.in)
		if (err == nil) != c.ok {
			t.Errorf("ParseCompassAddr(%q) error %v, want ok=%v", c.in, err, c.ok)
			continue
		}
		if err != nil {
			if !strings.Contains(err.Error(), "--nmea-feed") {
				t.Errorf("ParseCompassAddr(%q) error %q does not name the flag", c.in, err)
			}
			continue
		}
		if a.network != c.network || a.target != c.target || a.baud != c.baud {
			t.Errorf("ParseCompassAddr(%q) = %+v, want %s %s %d", c.in, a, c.network, c.target, c.baud)
		}
	}
}

func FuzzParseCompassAddr(f *testing.F) {
	for _, s := range []string{"tcp://127.0.0.1:10110", "udp://:10110", "serial:/dev/ttyUSB0@4800", "serial:///dev/x", "tcp://[::1]:1", "a:b@c", "serial:@", "udp://[:1"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		a, err := ParseCompassAddr(s)
		if err != nil {
			return
		}
		switch a.network {
		case "tcp", "udp":
			if _, _, err := net.SplitHostPort(strings.TrimPrefix(a.target, a.network+"://")); err != nil {
				t.Fatalf("%q gave target %q: %v", s, a.target, err)
			}
		case "serial":
			if a.target == "" || a.baud < 50 {
				t.Fatalf("%q gave %+v", s, a)
			}
		default:
			t.Fatalf("%q gave network %q", s, a.network)
		}
	})
}

func TestParseTurn(t *testing.T) {
	cases := []struct {
		in               string
		ok               bool
		start, rate, at0 float64
	}{
		{"0:30", true, 0, 30, 0},
		{"120:-12.5:4", true, 120, -12.5, 4},
		{" 10 : 5 ", true, 10, 5, 0},
		{"0:0", false, 0, 0, 0},
		{"0", false, 0, 0, 0},
		{"0:30:1:2", false, 0, 0, 0},
		{"x:30", false, 0, 0, 0},
		{"NaN:30", false, 0, 0, 0},
		{"0:Inf", false, 0, 0, 0},
		{"0:3600", false, 0, 0, 0}, // 180° between 20 Hz samples: direction ambiguous
		{"0:30:1e9", false, 0, 0, 0},
	}
	for _, c := range cases {
		st, err := ParseTurn(c.in, heading.Magnetic)
		if (err == nil) != c.ok {
			t.Errorf("ParseTurn(%q) error %v, want ok=%v", c.in, err, c.ok)
			continue
		}
		if err != nil {
			if !strings.Contains(err.Error(), "--turn") {
				t.Errorf("ParseTurn(%q) error %q does not name the flag", c.in, err)
			}
			continue
		}
		if st.StartDeg != c.start || st.RateDegPerS != c.rate || st.StartS != c.at0 || st.Ref != heading.Magnetic {
			t.Errorf("ParseTurn(%q) = %+v", c.in, st)
		}
	}
}

func FuzzParseTurn(f *testing.F) {
	for _, s := range []string{"0:30", "120:-12.5:4", "1e308:1e308", "::", "0:1e-300"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		st, err := ParseTurn(s, heading.True)
		if err != nil {
			return
		}
		// What the parser accepts, the track builder takes.
		if _, err := TurnTrack(st, 1); err != nil {
			t.Fatalf("%q accepted, but %v", s, err)
		}
	})
}

func TestParseReceiver(t *testing.T) {
	cases := []struct {
		in, want string
		ok       bool
	}{
		{"rtl_tcp://127.0.0.1:1234", "rtl_tcp://127.0.0.1:1234", true},
		{"RTL_TCP://sdr.local", "rtl_tcp://sdr.local:1234", true}, // rtl_tcp.c's default port
		{"rtl_tcp://[::1]", "rtl_tcp://[::1]:1234", true},
		{"rtl_tcp://[::1]:5000/", "rtl_tcp://[::1]:5000", true},
		{"usb://0", "usb://0", true},
		{"usb://3", "usb://3", true},
		{"rtl_tcp://", "", false},
		{"rtl_tcp://host:0", "", false},
		{"rtl_tcp://host:99999", "", false},
		{"rtl_tcp://:1234", "", false},
		{"usb://", "", false},
		{"usb://-1", "", false},
		{"usb://x", "", false},
		{"http://x:1", "", false},
	}
	for _, c := range cases {
		if IsReceiver(c.in) != (strings.HasPrefix(strings.ToLower(c.in), "rtl_tcp://") || strings.HasPrefix(c.in, "usb://")) {
			t.Errorf("IsReceiver(%q) = %v", c.in, IsReceiver(c.in))
		}
		r, err := ParseReceiver(c.in)
		if (err == nil) != c.ok {
			t.Errorf("ParseReceiver(%q) error %v, want ok=%v", c.in, err, c.ok)
			continue
		}
		if c.ok && r.String() != c.want {
			t.Errorf("ParseReceiver(%q) = %s, want %s", c.in, r, c.want)
		}
	}
}

func TestParseGainLatency(t *testing.T) {
	for _, c := range []struct {
		in   string
		ok   bool
		want Gain
	}{{"auto", true, Gain{Auto: true}}, {"AUTO", true, Gain{Auto: true}}, {"20.7", true, Gain{DB: 20.7}}, {"0", true, Gain{}},
		{"-1", false, Gain{}}, {"61", false, Gain{}}, {"NaN", false, Gain{}}, {"loud", false, Gain{}}} {
		g, err := ParseGain(c.in)
		if (err == nil) != c.ok || (c.ok && g != c.want) || (err != nil && !strings.Contains(err.Error(), "--gain")) {
			t.Errorf("ParseGain(%q) = %+v, %v", c.in, g, err)
		}
	}
	for _, c := range []struct {
		in   string
		ok   bool
		want Latency
	}{{"auto", true, Latency{Auto: true}}, {"", true, Latency{Auto: true}}, {"rtl_tcp", true, Latency{Auto: true}}, {"0.25", true, Latency{S: 0.25}},
		{"-0.1", false, Latency{}}, {"10", false, Latency{}}, {"NaN", false, Latency{}}, {"late", false, Latency{}}} {
		l, err := ParseLatency(c.in)
		if (err == nil) != c.ok || (c.ok && l != c.want) || (err != nil && !strings.Contains(err.Error(), "--iq-latency")) {
			t.Errorf("ParseLatency(%q) = %+v, %v", c.in, l, err)
		}
	}
}

// TestValidate: every numeric field is checked against its documented
// range, with one line naming the flag.
func TestValidate(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	st := heading.SteadyTurn{RateDegPerS: 30}
	cases := []struct {
		name string
		edit func(o *Options)
		want string // "" = valid
	}{
		{"defaults with a turn", func(o *Options) { o.Turn, o.DurationS = &st, 10 }, ""},
		{"no receiver", func(o *Options) { o.Receiver = Receiver{} }, "receiver"},
		{"rate NaN", func(o *Options) { o.RateHz = nan }, "--rate"},
		{"rate negative", func(o *Options) { o.RateHz = -1 }, "--rate"},
		{"centre Inf", func(o *Options) { o.CenterHz = inf }, "--center"},
		{"no tuning", func(o *Options) { o.FreqHz = 0 }, "--freq"},
		{"gain NaN", func(o *Options) { o.Gain = Gain{DB: nan} }, "--gain"},
		{"gain 99", func(o *Options) { o.Gain = Gain{DB: 99} }, "--gain"},
		{"ppm", func(o *Options) { o.PPM = 5000 }, "--ppm"},
		{"latency", func(o *Options) { o.Latency = Latency{S: -1} }, "--iq-latency"},
		{"duration NaN", func(o *Options) { o.DurationS = nan }, "--duration"},
		{"duration negative", func(o *Options) { o.DurationS = -5 }, "--duration"},
		{"duration a year", func(o *Options) { o.DurationS = 3e7 }, "--duration"},
		{"margin", func(o *Options) { o.MarginS = 1e4 }, "--margin"},
		{"margin NaN", func(o *Options) { o.MarginS = nan }, "--margin"},
		{"poll 0", func(o *Options) { o.PollHz = 0 }, "--poll-hz"},
		{"poll 1000", func(o *Options) { o.PollHz = 1000 }, "--poll-hz"},
		{"turn rate NaN", func(o *Options) { o.Turn = &heading.SteadyTurn{RateDegPerS: nan} }, "--turn"},
		{"no heading source", func(o *Options) {}, "heading source"},
		{"turn and a file", func(o *Options) { o.Turn, o.HeadingFile = &st, "--headings" }, "--turn and --headings"},
		{"sweep without rotator", func(o *Options) { o.Plan, o.Turn = &SweepPlan{ToDeg: 90}, &st }, "--rotator"},
		{"rotator and turn", func(o *Options) { o.Rotator, o.Plan, o.Turn = "h:1", &SweepPlan{ToDeg: 90}, &st }, "--rotator gives the headings"},
		{"rotator bad plan", func(o *Options) { o.Rotator, o.Plan = "h:1", &SweepPlan{ToDeg: nan} }, "--sweep"},
		{"compass without duration", func(o *Options) { o.Compass, o.DurationS = &CompassAddr{network: "udp", target: "udp://:1"}, 0 }, "--duration"},
		{"compass and rotator", func(o *Options) { o.Compass, o.Rotator = &CompassAddr{network: "udp", target: "udp://:1"}, "h:1" }, "--nmea-feed and --rotator"},
	}
	for _, c := range cases {
		o := testOptions(250000)
		o.DurationS = 10
		c.edit(&o)
		err := o.Validate()
		switch {
		case c.want == "" && err != nil:
			t.Errorf("%s: %v", c.name, err)
		case c.want != "" && (err == nil || !strings.Contains(err.Error(), c.want)):
			t.Errorf("%s: error %v, want one naming %q", c.name, err, c.want)
		case err != nil && strings.Contains(err.Error(), "\n"):
			t.Errorf("%s: error is not one line: %q", c.name, err)
		}
	}
}

// TestStatusFormat: the line shows the level as a bar (3 dB a cell from
// −60 dBFS), the heading and the progress, in under 80 columns, with no
// NaN whatever it is given.
func TestStatusFormat(t *testing.T) {
	cases := []struct {
		s     Status
		cells int
		want  []string
	}{
		{Status{ElapsedS: 12, TotalS: 27.1, LevelDBFS: -33, SNRDB: 21.6, SNRKnown: true, Source: "rotator", HeadingDeg: 72.44, HeadingKnown: true}, 9, []string{"-33.0 dBFS", "SNR 22 dB", "rotator  72.4°", "12.0/27.1s"}},
		{Status{ElapsedS: 12, TotalS: 27.1, LevelDBFS: -60, SNRDB: 140, SNRKnown: true, Source: "rotator", HeadingDeg: -172.44, HeadingKnown: true}, 0, []string{"SNR 99 dB", "rotator -172.4°"}},
		{Status{ElapsedS: 3.25, LevelDBFS: 0, Clipping: true, Source: "compass"}, 20, []string{"0.0 dBFS", "CLIPPING", "compass    --", "3.2s"}},
		{Status{LevelDBFS: -120, Source: "turn", HeadingDeg: 359.96, HeadingKnown: true}, 0, []string{"-120.0 dBFS", "turn   0.0°"}},
		{Status{LevelDBFS: math.NaN(), HeadingDeg: math.Inf(1), HeadingKnown: true, Source: "compass"}, 0, []string{"-120.0 dBFS", "compass    --"}},
	}
	for _, c := range cases {
		line := c.s.format()
		if n := strings.Count(line, "#"); n != c.cells || strings.Count(line, "#")+strings.Count(line, ".") < barCells {
			t.Errorf("%q: %d bar cells lit, want %d", line, n, c.cells)
		}
		for _, w := range c.want {
			if !strings.Contains(line, w) {
				t.Errorf("%q does not show %q", line, w)
			}
		}
		if strings.Contains(line, "NaN") || strings.Contains(line, "Inf") || len([]rune(line)) > 80 {
			t.Errorf("%q: NaN/Inf or longer than 80 columns", line)
		}
	}
	// Redrawn in place, cleared at the end.
	var b bytes.Buffer
	l := &StatusLine{w: &b}
	l.Clear()
	if b.Len() != 0 {
		t.Errorf("Clear before any Show wrote %q", b.String())
	}
	l.Show(cases[0].s)
	l.Show(cases[1].s)
	l.Clear()
	if got := b.String(); strings.Count(got, "\r") != 3 || strings.Count(got, "\x1b[K") != 3 || !strings.HasSuffix(got, "\r\x1b[K") {
		t.Errorf("status output %q: want each line led by CR and followed by EL, and a final erase", got)
	}
	// Not a terminal: a plain line every Every, the first after one period.
	if NewStatus(nil) != nil {
		t.Error("a status display without a writer")
	}
	b.Reset()
	now := time.Date(2026, 5, 1, 12, 0, 0, 0, time.UTC)
	sink := NewStatus(&b)
	p, ok := sink.(*PlainStatus)
	if !ok {
		t.Fatalf("NewStatus of a buffer is %T, want a PlainStatus", sink)
	}
	p.Now = func() time.Time { return now }
	for i := 0; i < 25; i++ { // 25 s, shown 4 times a second
		for k := 0; k < 4; k++ {
			p.Show(cases[0].s)
			now = now.Add(250 * time.Millisecond)
		}
	}
	p.Clear()
	lines := strings.Split(strings.TrimSuffix(b.String(), "\n"), "\n")
	if len(lines) != 2 || strings.ContainsAny(b.String(), "\r\x1b") || !strings.HasPrefix(lines[0], "status level [") {
		t.Errorf("plain status over 25 s: %q; want 2 lines (at 10 s and 20 s) without control characters", b.String())
	}
}

// TestFloor: the sliding-window minimum under Status.SNRDB against a
// brute-force minimum over the same window.
func TestFloor(t *testing.T) {
	var f floor
	var ts, dbs []float64
	for i := 0; i < 2000; i++ {
		tm := float64(i) * 0.25
		db := -40 + 10*math.Sin(float64(i)/37) + 3*math.Cos(float64(i)*1.7)
		ts, dbs = append(ts, tm), append(dbs, db)
		got, ok := f.add(tm, db)
		want := db
		for j := range ts {
			if ts[j] >= tm-FloorWindowS {
				want = min(want, dbs[j])
			}
		}
		if ok != (tm >= 1) || (ok && math.Abs(got-(db-want)) > 1e-12) {
			t.Fatalf("at %.2f s: %v %v, want %v above the floor", tm, got, ok, db-want)
		}
	}
	if len(f.db) > int(FloorWindowS/0.25)+2 {
		t.Errorf("the floor keeps %d levels for a %v s window", len(f.db), FloorWindowS)
	}
}
