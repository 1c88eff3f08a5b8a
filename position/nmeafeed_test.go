package position

import (
	"context"
	"math"
	"net"
	"strings"
	"testing"
	"time"
)

func feed(t *testing.T, lines ...string) (*NMEA, NMEAStats) {
	t.Helper()
	s := NewNMEA("test", strings.NewReader(strings.Join(lines, "\r\n")+"\r\n"))
	if err := s.Run(context.Background()); err != nil {
		t.Fatal(err)
	}
	return s, s.Stats()
}

// TestNMEAJoin: the GGA and RMC of one time of day make one fix with the
// RMC's date, GGA's altitude and HDOP (NMEA.Run's joining rule); values
// are the sentences' own fields (DePriest's example, then hand-built).
func TestNMEAJoin(t *testing.T) {
	s, st := feed(t,
		dePriestGGA, dePriestRMC,
		sentence("GPGSA,A,3,04,05,,09,12,,,24,,,,,2.5,1.3,2.1"),
		sentence("GPGGA,123520,4807.040,N,01131.010,E,1,08,1.1,546.0,M,46.9,M,,"),
		sentence("GPRMC,123520,A,4807.040,N,01131.010,E,022.4,084.4,230394,003.1,W"),
	)
	if st.Fixes != 2 || st.GGA != 2 || st.RMC != 2 || st.Other != 1 || st.Problems() != 0 || st.Lines != 5 {
		t.Fatalf("stats %+v", st)
	}
	f := s.Track.Fixes()
	want0 := time.Date(1994, 3, 23, 12, 35, 19, 0, time.UTC)
	if !f[0].Time.Equal(want0) || f[0].LatDeg != 48.1173 || math.Abs(f[0].LonDeg-(11+31.0/60)) > 1e-12 ||
		f[0].Mode != Mode3D || f[0].Quality != 1 || *f[0].HDOP != 0.9 || *f[0].AltMSLM != 545.4 ||
		math.Abs(*f[0].AltHAEM-592.3) > 1e-9 || f[0].HErrM != nil || f[0].Source != "nmea test" {
		t.Errorf("fix 0 %+v", f[0])
	}
	if !f[1].Time.Equal(want0.Add(time.Second)) || math.Abs(f[1].LatDeg-(48+7.04/60)) > 1e-12 || *f[1].HDOP != 1.1 {
		t.Errorf("fix 1 %+v", f[1])
	}
}

// TestNMEAEdges: no-fix marks, GGA before any date, midnight passed with
// GGA only, an RMC-only receiver (2D fixes), and every kind of bad line,
// each counted where NMEAStats says and none stopping the read.
func TestNMEAEdges(t *testing.T) {
	long := "$GPGGA," + strings.Repeat("9", 600) // beyond the line buffer
	s, st := feed(t,
		sentence("GNGGA,235958,5130.000,N,00007.500,W,1,07,1.0,20.0,M,47.0,M,,"), // no date yet
		sentence("GNRMC,235959,A,5130.000,N,00007.500,W,0.0,0.0,311225,,,A"),     // RMC only: 2D
		sentence("GNGGA,000000,5130.001,N,00007.500,W,1,07,1.0,20.0,M,,M,,"),     // next day, no separation
		sentence("GNGGA,000001,,,,,0,00,,,M,,M,,"),                               // quality 0
		sentence("GNRMC,000002,V,5130.002,N,00007.500,W,0.0,0.0,010126,,,N"),     // void
		"$GNGGA,000003,5130.003,N,00007.500,W,1,07,1.0,20.0,M,,M,,*00",           // bad checksum
		"$GNGGA,000003,5130.003,N,00007.500,W,1,07,1.0,20.0,M,,M,,",              // no checksum
		"\x00\xffnot nmea at all",
		long,
		"$GPGGA,"+strings.Repeat("1", 100),
		sentence("GNGGA,000004,5130.004,N,00007.500,W,1,07,1.0,20.0,M,,M,,"),
		sentence("GNGGA,000003,5130.003,N,00007.500,W,1,07,1.0,20.0,M,,M,,"), // earlier
		sentence("GNGGA,000005,5130.005,N,00007.500,W,9,07,1.0,20.0,M,,M,,"), // invalid field
	)
	want := NMEAStats{Lines: 13, GGA: 5, RMC: 2, Garbage: 1, TooLong: 2, BadChecksum: 1, NoChecksum: 1, Invalid: 1,
		Fixes: 3, NoFix: 2, NoDate: 1, OutOfOrder: 1}
	want.First = st.First
	if st != want {
		t.Errorf("stats\n %+v\nwant\n %+v", st, want)
	}
	if !strings.HasPrefix(st.First, "line 6: NMEA checksum mismatch") {
		t.Errorf("first problem %q", st.First)
	}
	f := s.Track.Fixes()
	if len(f) != 3 {
		t.Fatalf("%d fixes", len(f))
	}
	if !f[0].Time.Equal(time.Date(2025, 12, 31, 23, 59, 59, 0, time.UTC)) || f[0].Mode != Mode2D || f[0].HDOP != nil || f[0].LonDeg != -7.5/60 {
		t.Errorf("RMC-only fix %+v", f[0])
	}
	if !f[1].Time.Equal(time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)) || f[1].AltHAEM != nil || *f[1].AltMSLM != 20 {
		t.Errorf("after midnight %+v", f[1])
	}
	if !f[2].Time.Equal(time.Date(2026, 1, 1, 0, 0, 4, 0, time.UTC)) {
		t.Errorf("last %+v", f[2])
	}
}

// TestNMEACancel: a connection that sends nothing is left as soon as the
// context ends (net.Conn's read deadline).
func TestNMEACancel(t *testing.T) {
	a, b := net.Pipe()
	defer a.Close()
	defer b.Close()
	s := NewNMEA("pipe", a)
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- s.Run(ctx) }()
	b.Write([]byte(dePriestGGA + "\r\n" + dePriestRMC + "\r\n"))
	cancel()
	endsWithin(t, done, 5*time.Second, "Run did not return after cancel")
	if st := s.Stats(); st.Fixes != 1 {
		t.Errorf("stats %+v", st)
	}
}

// endsWithin waits for done: a Run's error fails the test, and so does no
// end within d (msg says what should have ended it).
func endsWithin(t *testing.T, done <-chan error, d time.Duration, msg string) {
	t.Helper()
	select {
	case err := <-done:
		if err != nil {
			t.Fatal(err)
		}
	case <-time.After(d):
		t.Fatal(msg)
	}
}
