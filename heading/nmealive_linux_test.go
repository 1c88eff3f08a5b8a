//go:build linux

package heading

import (
	"context"
	"nullseek/internal/testtool"
	"testing"
	"time"
)

func TestNMEASerialPTY(t *testing.T) {
	m, slave, err := testtool.OpenPTY()
	if err != nil {
		testtool.Unavailable(t, "a pseudo-terminal", err)
	}
	t.Cleanup(func() { m.Close() })
	s, err := OpenNMEASerial(slave, 4800)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	s.Logger = discardLogger
	go func() {
		for _, line := range []string{"$GPHDT,274.07,T*03\r\n", "$GPHDT,274.07,T*13\r\n", "$SDHDG,234.6,,,1.3,E*34\r\n"} {
			time.Sleep(80 * time.Millisecond)
			m.Write([]byte(line))
		}
	}()
	ctx, cancel := context.WithTimeout(context.Background(), 800*time.Millisecond)
	defer cancel()
	tr, err := s.Record(ctx, time.Now(), True)
	if err != nil {
		t.Fatal(err)
	}
	// NMEA 0183 values: HDT 274.07; HDG 234.6 + 1.3 E = 235.9 true.
	if len(tr.Samples) != 2 || tr.Samples[0].Deg != 274.07 || !near(tr.Samples[1].Deg, 235.9, 1e-9) {
		t.Fatalf("samples %v", tr.Samples)
	}
	if st := s.Stats(); st.BadChecksum != 1 {
		t.Fatalf("stats %s", st)
	}
	if _, err := OpenNMEASerial("/dev/nonexistent-tty", 4800); err == nil {
		t.Fatal("missing port opened")
	}
}
