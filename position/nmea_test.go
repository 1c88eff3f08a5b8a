package position

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"
	"time"

	"nullseek/internal/nmea"
)

// sentence returns "$body*hh" with the NMEA 0183 checksum (nmea.Checksum,
// itself checked against published sentences and gpsd).
func sentence(body string) string { return fmt.Sprintf("$%s*%02X", body, nmea.Checksum(body)) }

// The example GGA and RMC of Dale DePriest's "NMEA data" page (from
// memory; gpsd 3.22 accepts both, TestGpsfakeDePriest). Expected values are
// the sentences' own fields read by NMEA 0183's layout: 4807.038,N is
// 48° 07.038' N = 48.1173°; 01131.000,E is 11° 31' E = 11.51666…°.
const (
	dePriestGGA = "$GPGGA,123519,4807.038,N,01131.000,E,1,08,0.9,545.4,M,46.9,M,,*47"
	dePriestRMC = "$GPRMC,123519,A,4807.038,N,01131.000,E,022.4,084.4,230394,003.1,W*6A"
)

func TestParseGGADePriest(t *testing.T) {
	g, err := ParseGGA(dePriestGGA)
	if err != nil {
		t.Fatal(err)
	}
	if g.Talker != "GP" || g.TimeOfDay != 12*time.Hour+35*time.Minute+19*time.Second || g.Quality != 1 || g.Satellites != 8 {
		t.Errorf("GGA %+v", g)
	}
	if !g.HasPos || math.Abs(g.LatDeg-48.1173) > 1e-12 || math.Abs(g.LonDeg-(11+31.0/60)) > 1e-12 {
		t.Errorf("position %v, %v", g.LatDeg, g.LonDeg)
	}
	if *g.HDOP != 0.9 || *g.AltMSLM != 545.4 || *g.GeoidSepM != 46.9 {
		t.Errorf("HDOP %v alt %v sep %v", *g.HDOP, *g.AltMSLM, *g.GeoidSepM)
	}
}

func TestParseRMCDePriest(t *testing.T) {
	r, err := ParseRMC(dePriestRMC)
	if err != nil {
		t.Fatal(err)
	}
	if want := time.Date(1994, 3, 23, 12, 35, 19, 0, time.UTC); !r.Time.Equal(want) {
		t.Errorf("time %v, want %v", r.Time, want)
	}
	if !r.Valid || r.Status != 'A' || r.ModeIndicator != 0 || math.Abs(r.LatDeg-48.1173) > 1e-12 {
		t.Errorf("RMC %+v", r)
	}
}

// TestParseFields covers the field rules on hand-built sentences: the
// hemisphere signs, fractional seconds, talkers of every GNSS, RMC mode
// indicator (NMEA 2.3), and the refusals, each naming its field.
func TestParseFields(t *testing.T) {
	for _, talker := range []string{"GP", "GN", "GL", "GA", "BD", "GB", "GQ"} {
		g, err := ParseGGA(sentence(talker + "GGA,235959.125,3351.500,S,15112.750,W,2,12,1.2,-3.5,M,-20.0,M,1.0,0123"))
		if err != nil {
			t.Fatalf("%s: %v", talker, err)
		}
		if g.Talker != talker || g.LatDeg != -(33+51.5/60) || g.LonDeg != -(151+12.75/60) ||
			g.TimeOfDay != 23*time.Hour+59*time.Minute+59*time.Second+125*time.Millisecond || *g.AltMSLM != -3.5 || *g.GeoidSepM != -20 {
			t.Errorf("%s: %+v", talker, g)
		}
	}
	r, err := ParseRMC(sentence("GNRMC,000000.50,A,0000.000,N,00000.000,E,0.0,,010100,,,N"))
	if err != nil || r.Valid || r.ModeIndicator != 'N' {
		t.Errorf("mode N: %+v %v", r, err)
	}
	if r, err := ParseRMC(sentence("GNRMC,000000,V,,,,,,,311299,,,N")); err != nil || r.Valid || r.HasPos || r.Time.Year() != 1999 {
		t.Errorf("void RMC: %+v %v", r, err)
	}
	// A receiver before its first fix sends empty fields (u-blox receivers'
	// documented no-fix output, from memory): no fix, not an error.
	if g, err := ParseGGA(sentence("GPGGA,,,,,,0,00,99.99,,,,,,")); err != nil || g.Quality != 0 || g.HasPos || g.HasTime {
		t.Errorf("empty GGA: %+v %v", g, err)
	}
	if r, err := ParseRMC(sentence("GPRMC,,V,,,,,,,,,,N")); err != nil || r.Valid || r.HasTime {
		t.Errorf("empty RMC: %+v %v", r, err)
	}
	for _, tc := range []struct{ line, sub string }{
		{sentence("GPGGA,123519,4807.038,N,01131.000,E,1,08,0.9,545.4,M,46.9,M"), "fields"},
		{sentence("GPGGA,,4807.038,N,01131.000,E,1,08,0.9,545.4,M,46.9,M,,"), "time"},
		{sentence("GPRMC,,A,4807.038,N,01131.000,E,022.4,084.4,230394,003.1,W"), "time"},
		{sentence("GPGGA,126019,4807.038,N,01131.000,E,1,08,0.9,545.4,M,46.9,M,,"), "time"},
		{sentence("GPGGA,123519,4860.038,N,01131.000,E,1,08,0.9,545.4,M,46.9,M,,"), "minutes"},
		{sentence("GPGGA,123519,9107.038,N,01131.000,E,1,08,0.9,545.4,M,46.9,M,,"), "beyond 90"},
		{sentence("GPGGA,123519,4807.038,X,01131.000,E,1,08,0.9,545.4,M,46.9,M,,"), "N or S"},
		{sentence("GPGGA,123519,4807.038,N,18131.000,E,1,08,0.9,545.4,M,46.9,M,,"), "beyond 180"},
		{sentence("GPGGA,123519,4807.038,N,01131.000,E,9,08,0.9,545.4,M,46.9,M,,"), "quality"},
		{sentence("GPGGA,123519,,,,,1,08,0.9,545.4,M,46.9,M,,"), "without a position"},
		{sentence("GPGGA,123519,4807.038,N,01131.000,E,1,08,0.9,545.4,F,46.9,M,,"), "unit"},
		{sentence("GPGGA,123519,4807.038,N,01131.000,E,1,08,NaN,545.4,M,46.9,M,,"), "HDOP"},
		{sentence("GPRMC,123519,X,4807.038,N,01131.000,E,022.4,084.4,230394,003.1,W"), "status"},
		{sentence("GPRMC,123519,A,4807.038,N,01131.000,E,022.4,084.4,300294,003.1,W"), "date"},
		{sentence("GPRMC,123519,A,,,,,022.4,084.4,230394,003.1,W"), "without a position"},
		{sentence("GPRMC,123519,A,4807.038,N,01131.000,E,022.4,084.4,230394,003.1,W,Q"), "mode indicator"},
		{"$GPGGA,123519,4807.038,N,01131.000,E,1,08,0.9,545.4,M,46.9,M,,*48", "checksum"},
	} {
		var err error
		if strings.Contains(tc.line, "RMC") {
			_, err = ParseRMC(tc.line)
		} else {
			_, err = ParseGGA(tc.line)
		}
		if err == nil || !strings.Contains(err.Error(), tc.sub) {
			t.Errorf("%s: error %v, want it to say %q", tc.line, err, tc.sub)
		}
	}
	if _, err := ParseGGA(dePriestRMC); !errors.Is(err, ErrNMEAOther) {
		t.Errorf("RMC as GGA: %v", err)
	}
}
