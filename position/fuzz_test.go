package position

import (
	"bytes"
	"context"
	"strings"
	"testing"

	"nullseek/internal/nmea"
	"nullseek/internal/testtool"
)

// FuzzNMEAFeed: any bytes from an NMEA source in reads of any size: no
// panic; every line is counted once (NMEAStats' partition); every fix is
// usable (2D/3D, a time, latitude and longitude in range: Fix.Usable),
// strictly later than the one before, and comes from a GGA or RMC whose
// checksum matched (NMEA 0183), so no fix comes out of input that holds no
// such sentence.
func FuzzNMEAFeed(f *testing.F) {
	for _, s := range []string{
		dePriestGGA + "\r\n" + dePriestRMC + "\r\n",
		strings.Join(movingLog("010526", 0), "\r\n"),
		"$GPGGA,,,,,,0,00,99.99,,,,,,*48\r\n$GPRMC,,V,,,,,,,,,,N*53\n\x00\xff junk\n",
		sentence("GNRMC,235959,A,5130.000,N,00007.500,W,0.0,0.0,311225,,,A") + "\n" + sentence("GNGGA,000000,5130.001,N,00007.500,W,1,07,1.0,20.0,M,,M,,"),
		"", "\n\n\r\n", "$", strings.Repeat("$GPGGA,", 200),
	} {
		f.Add([]byte(s), uint8(7))
	}
	f.Fuzz(func(t *testing.T, data []byte, chunk uint8) {
		s := NewNMEA("fuzz", testtool.ChunkReader(data, int(chunk)%97+1))
		if err := s.Run(context.Background()); err != nil {
			t.Fatal(err)
		}
		st := s.Stats()
		if sum := st.GGA + st.RMC + st.Other + st.Problems(); sum != st.Lines {
			t.Fatalf("%d lines, %d counted: %+v", st.Lines, sum, st)
		}
		fixes := s.Track.Fixes()
		if len(fixes) != st.Fixes {
			t.Fatalf("%d fixes kept, %d counted", len(fixes), st.Fixes)
		}
		for i, fx := range fixes {
			if err := fx.Usable(); err != nil {
				t.Fatalf("fix %d: %v: %+v", i, err, fx)
			}
			if i > 0 && !fx.Time.After(fixes[i-1].Time) {
				t.Fatalf("fix %d at %v not after %v", i, fx.Time, fixes[i-1].Time)
			}
		}
		if len(fixes) > 0 && !hasGoodSentence(data) {
			t.Fatalf("fixes from input without a checksummed GGA or RMC")
		}
	})
}

func hasGoodSentence(data []byte) bool {
	for _, l := range bytes.Split(data, []byte("\n")) {
		sen, err := nmea.Split(string(l), true)
		if err == nil && (sen.Type == "GGA" || sen.Type == "RMC") {
			return true
		}
	}
	return false
}
