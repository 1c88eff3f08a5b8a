package heading

import (
	"bytes"
	"context"
	"errors"
	"nullseek/internal/testtool"
	"strings"
	"testing"
	"time"
)

// FuzzNMEAStream: any bytes from a live NMEA 0183 source, arriving in
// reads of any size: no panic; every reading handed to the callback is a
// well-formed heading (in [0, 360), a matching checksum: NMEA 0183), the
// counts add up (Accepted = callbacks, every line counted once), and the
// too-long count is bounded by the bytes over MaxLineBytes.
func FuzzNMEAStream(f *testing.F) {
	for _, s := range []string{
		"$GPHDT,274.07,T*03\r\n$SDHDG,234.6,,,1.3,E*34\r\n", // NMEA 0183 example sentences
		"$APHDM,218.634,M*39\n\x00\xff junk\n$GPHDT,274.07,T*04\r\n",
		"$GPGGA,,,,,,0,00,,,M,,M,,*66\r\n$HCHDG,101.1,2.5,W,4.0,E*52",
		"", "\n\n\r\n", "$",
	} {
		f.Add([]byte(s), uint16(7), uint16(0), false)
	}
	f.Add([]byte("\n$GPHDT,274.07,T*03\n"), uint16(1000), uint16(5000), false)
	f.Add([]byte("$GPHDT,10.5,T\n"), uint16(3), uint16(0), true)
	// pad puts that many bytes of 'x' before data, so long lines are
	// reachable from small inputs (Go's minimiser is quadratic in the
	// input's length).
	f.Fuzz(func(t *testing.T, data []byte, chunk, pad uint16, noChecksum bool) {
		data = append(bytes.Repeat([]byte{'x'}, int(pad)%20000), data...)
		s := newLineStream("fuzz", testtool.ChunkReader(data, int(chunk)%600+1), func(time.Time) error { return nil }, func() error { return nil })
		s.Logger = discardLogger
		s.AllowMissingChecksum = noChecksum
		calls := 0
		err := s.Run(context.Background(), func(lr LiveReading) {
			calls++
			for _, d := range []float64{lr.TrueDeg, lr.MagDeg, lr.SensorDeg} {
				if !(d >= 0 && d < 360) {
					t.Fatalf("heading %v outside [0, 360)", d)
				}
			}
			if !lr.HasTrue && !lr.HasMag {
				t.Fatal("a reading without any heading")
			}
		})
		st := s.Stats()
		if err != nil && st.Accepted > 0 {
			t.Fatalf("error after %d readings: %v", st.Accepted, err)
		}
		if err != nil && strings.Contains(err.Error(), "\n") {
			t.Fatalf("multi-line error %q", err)
		}
		if st.Accepted != calls || st.Accepted+st.Skipped() != st.Lines {
			t.Fatalf("counts: %d callbacks, %s", calls, st)
		}
		if st.TooLong > 0 && len(data) < st.TooLong*(MaxNMEALen-1) {
			t.Fatalf("%d too-long lines from %d bytes", st.TooLong, len(data))
		}
		if got := bytes.Count(data, []byte{'\n'}) + 1; st.Lines > got {
			t.Fatalf("%d lines from %d newlines", st.Lines, got-1)
		}
		if errors.Is(err, context.Canceled) {
			t.Fatal("cancelled without a cancel")
		}
	})
}
