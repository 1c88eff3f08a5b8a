package nmea

import (
	"errors"
	"fmt"
	"strings"
	"testing"
)

// The GGA and RMC sentences are the widely quoted examples of Dale
// DePriest's "NMEA data" page (from memory); gpsd 3.22 accepts both (run in
// package position's gpsfake test). The HDT one is NMEA 0183's, checked
// against gpsd in package heading.
func TestChecksumPublished(t *testing.T) {
	for _, s := range []string{
		"$GPGGA,123519,4807.038,N,01131.000,E,1,08,0.9,545.4,M,46.9,M,,*47",
		"$GPRMC,123519,A,4807.038,N,01131.000,E,022.4,084.4,230394,003.1,W*6A",
		"$GPHDT,274.07,T*03",
	} {
		sen, err := Split(s+"\r\n", true)
		if err != nil {
			t.Fatalf("%s: %v", s, err)
		}
		if sen.Talker != "GP" || sen.Type != s[3:6] {
			t.Errorf("%s: address %s%s", s, sen.Talker, sen.Type)
		}
		if got := strings.Join(sen.Fields, ","); got != s[7:strings.IndexByte(s, '*')] {
			t.Errorf("%s: fields %q", s, got)
		}
	}
}

func TestSplitRefusals(t *testing.T) {
	for _, tc := range []struct {
		line string
		is   error
		sub  string
	}{
		{"$GPHDT,274.07,T*04", ErrChecksum, "says 04, computed 03"},
		{"$GPHDT,274.07,T", ErrNoChecksum, ""},
		{"GPHDT,274.07,T*03", nil, "does not start"},
		{"$GPHDT,274.07,T*3", nil, "not 2 hex"},
		{"$GPHDT,274.07,T*zz", nil, "not 2 hex"},
		{"$GPHD,1*" + hex(Checksum("GPHD,1")), nil, "address"},
		{"$GPHDT,27\x014.07,T*03", nil, "non-printable"},
		{"$GPGGA," + strings.Repeat("1", 80) + "*00", nil, "longer than 82"},
	} {
		_, err := Split(tc.line, true)
		if err == nil {
			t.Errorf("%q: accepted", tc.line)
			continue
		}
		if tc.is != nil && !errors.Is(err, tc.is) {
			t.Errorf("%q: %v, want %v", tc.line, err, tc.is)
		}
		if !strings.Contains(err.Error(), tc.sub) {
			t.Errorf("%q: %v, want it to say %q", tc.line, err, tc.sub)
		}
	}
	if _, err := Split("$GPHDT,274.07,T", false); err != nil {
		t.Errorf("checksum not required: %v", err)
	}
}

func hex(b byte) string { return fmt.Sprintf("%02X", b) }

func TestIsDecimal(t *testing.T) {
	for s, want := range map[string]bool{"4807.038": true, "0": true, ".5": true, "": false, ".": false,
		"-1": false, "1e3": false, "NaN": false, "1.2.3": false, " 1": false} {
		if IsDecimal(s) != want {
			t.Errorf("IsDecimal(%q) = %v", s, !want)
		}
	}
}
