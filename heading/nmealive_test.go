package heading

import (
	"context"
	"net"
	"strings"
	"testing"
	"time"
)

// serveTCP accepts one connection, writes the lines with a pause between
// them, then closes (or, with hold, waits that long before closing).
func serveTCP(t *testing.T, lines []string, pause, hold time.Duration) string {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { l.Close() })
	go func() {
		c, err := l.Accept()
		if err != nil {
			return
		}
		defer c.Close()
		for _, s := range lines {
			if _, err := c.Write([]byte(s)); err != nil {
				return
			}
			time.Sleep(pause)
		}
		time.Sleep(hold)
	}()
	return "tcp://" + l.Addr().String()
}

func TestNMEATCP(t *testing.T) {
	// NMEA 0183 HDT/HDG sentences (gpsd 3.22 examples), plus the junk a real link carries.
	lines := []string{
		"$GPHDT,274.07,T*03\r\n",
		"$GPHDT,274.07,T*04\r\n", // bad checksum
		"$SDHDG,234.6,,,1.3,E*34\r\n",
		"\x00\xff noise\r\n",
		"$APHDM,218.634,M*39\r\n", // no true heading
		"$GPGGA,,,,,,0,00,,,M,,M,,*66\r\n",
		"$HCHDG,101.1,2.5,W,4.0,E*52", // last line without newline
	}
	addr := serveTCP(t, lines, 20*time.Millisecond, 0)
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	s, err := DialNMEA(ctx, addr)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	s.Logger = discardLogger
	start := time.Now()
	tr, err := s.Record(ctx, start, True)
	if err != nil {
		t.Fatal(err)
	}
	want := []float64{274.07, 235.9, 102.6} // NMEA 0183 HDT and HDG field order
	if len(tr.Samples) != len(want) {
		t.Fatalf("samples %v", tr.Samples)
	}
	for i, w := range want {
		if !near(tr.Samples[i].Deg, w, 1e-9) {
			t.Fatalf("sample %d = %v, want %v°", i, tr.Samples[i], w)
		}
		if tr.Samples[i].T < 0 || tr.Samples[i].T > 2 {
			t.Fatalf("sample %d stamped %v s after start", i, tr.Samples[i].T)
		}
	}
	st := s.Stats()
	if st.Lines != 7 || st.Accepted != 3 || st.BadChecksum != 1 || st.Garbage != 1 || st.OtherRef != 1 || st.Unsupported != 1 {
		t.Fatalf("stats %s", st)
	}
}

func TestNMEALiveErrors(t *testing.T) {
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	t.Run("nothing valid before close", func(t *testing.T) {
		addr := serveTCP(t, []string{"hello\r\n", "$GPHDT,274.07,T*00\r\n"}, 0, 0)
		s, err := DialNMEA(ctx, addr)
		if err != nil {
			t.Fatal(err)
		}
		defer s.Close()
		s.Logger = discardLogger
		err = s.Run(ctx, func(LiveReading) {})
		if err == nil || !strings.Contains(err.Error(), "no valid heading sentence") || !strings.Contains(err.Error(), "1 bad checksum") {
			t.Fatalf("err = %v", err)
		}
	})
	t.Run("silent source times out", func(t *testing.T) {
		addr := serveTCP(t, nil, 0, 3*time.Second)
		s, err := DialNMEA(ctx, addr)
		if err != nil {
			t.Fatal(err)
		}
		defer s.Close()
		s.IdleTimeout = 200 * time.Millisecond
		t0 := time.Now()
		err = s.Run(ctx, func(LiveReading) {})
		if err == nil || !strings.Contains(err.Error(), "nothing received for 200ms") {
			t.Fatalf("err = %v", err)
		}
		if d := time.Since(t0); d > time.Second {
			t.Fatalf("took %v", d)
		}
	})
	t.Run("cancel ends Run", func(t *testing.T) {
		addr := serveTCP(t, []string{"$GPHDT,274.07,T*03\r\n"}, 0, 3*time.Second)
		s, err := DialNMEA(ctx, addr)
		if err != nil {
			t.Fatal(err)
		}
		defer s.Close()
		c2, cancel2 := context.WithTimeout(ctx, 300*time.Millisecond)
		defer cancel2()
		n := 0
		if err := s.Run(c2, func(LiveReading) { n++ }); err != nil || n != 1 {
			t.Fatalf("Run = %v after %d readings", err, n)
		}
	})
	for _, bad := range []string{"tcp:/x", "ftp://127.0.0.1:1", "udp://nohostport", "tcp://"} {
		if _, err := DialNMEA(ctx, bad); err == nil {
			t.Errorf("DialNMEA(%q) accepted", bad)
		}
	}
}

func TestNMEAUDP(t *testing.T) {
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	s, err := DialNMEA(ctx, "udp://127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	s.Logger = discardLogger
	c, err := net.Dial("udp", s.LocalAddr().String())
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	go func() {
		// Datagrams as a compass bridge sends them: one or several lines.
		for _, d := range []string{
			"$HCHDM,0.5,M*2C\r\n",
			"$APHDM,218.634,M*39\r\n$SDHDG,234.6,,,1.3,E*34\r\n",
			"junk",
		} {
			time.Sleep(50 * time.Millisecond)
			c.Write([]byte(d))
		}
	}()
	rec, cancelRec := context.WithTimeout(ctx, 600*time.Millisecond)
	defer cancelRec()
	tr, err := s.Record(rec, time.Now(), Magnetic)
	if err != nil {
		t.Fatal(err)
	}
	// NMEA 0183: HDM 218.634; HDG 234.6 with no deviation is 234.6
	// magnetic. The two in one datagram share an arrival time, so the
	// second is Stale.
	if len(tr.Samples) != 2 || tr.Samples[0].Deg != 0.5 || tr.Samples[1].Deg != 218.634 {
		t.Fatalf("samples %v", tr.Samples)
	}
	if st := s.Stats(); st.Stale != 1 || st.Garbage != 1 || st.Lines != 4 {
		t.Fatalf("stats %s", st)
	}
}
