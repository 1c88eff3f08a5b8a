package units

import (
	"math"
	"os/exec"
	"strconv"
	"strings"
	"testing"

	"nullseek/internal/testtool"
)

// TestParseHz: the SI prefixes k = 10³, M = 10⁶, G = 10⁹ (BIPM, The
// International System of Units, 9th ed. 2019, table 7), with and without
// "Hz", and the forms issue 11 asks for: 144.525MHz, 144.525M, 144525000.
func TestParseHz(t *testing.T) {
	for in, want := range map[string]float64{
		"144.525MHz": 144.525e6, "144.525M": 144.525e6, "144525000": 144525000, "144.525 MHz": 144.525e6,
		"144.525MHZ": 144.525e6, "12.5k": 12500, "12.5K": 12500, "-12.5kHz": -12500,
		"2.4M": 2.4e6, "1.2G": 1.2e9, "1.2GHz": 1.2e9, "433.92e6": 433.92e6, "48000Hz": 48000, "+250": 250,
		".5M": 5e5, "0": 0, "145.": 145,
		// issue 13: the hertz forms every flag takes, and the ones the
		// command line's own parser took before (145.5M, -12.5k, 433920000).
		"12.5kHz": 12500, "433920000Hz": 433920000, "145.5M": 145.5e6, "-12.5k": -12500, "433920000": 433920000,
	} {
		got, err := ParseHz(in)
		if err != nil || math.Abs(got-want) > 1e-6*math.Abs(want) {
			t.Errorf("ParseHz(%q) = %v, %v; want %v", in, got, err, want)
		}
	}
	for in, part := range map[string]string{
		"": "not a number", "MHz": "not a number", "144.525mHz": "m is milli", "144.525m": "m is milli",
		"144.525 MHz MHz": "not a number", "inf": "not a number", "NaN": "not a number", "0x10": "not a number",
		"1e999": "not a finite", "144,525M": "not a number", "5 furlongs": "unknown unit", "1_000": "not a number",
		"144.525T": "unknown unit",
	} {
		_, err := ParseHz(in)
		if err == nil || !strings.Contains(err.Error(), part) || !strings.Contains(err.Error(), "144.525MHz") {
			t.Errorf("ParseHz(%q): %v, want an error saying %q with examples", in, err, part)
		}
	}
}

// TestParseLatLonAgainstGeoConvert: every form ParseLatLon reads gives the
// value GeographicLib's GeoConvert (2.1.2, DMS::DecodeLatLon) gives, and
// what GeoConvert refuses, ParseLatLon refuses too.
func TestParseLatLonAgainstGeoConvert(t *testing.T) {
	bin := testtool.Need(t, "GeoConvert", "--version")
	good := []string{
		"52.2424 5.8672", "-33.5 -70.25", "33.5S 70.25W", "S33.5 W70.25", "5.8672E 52.2424N",
		"52:14:32.6N 5:52:1.9E", "52°14′32.6″N 5°52′1.9″E", "52d14'32.6\"N 5d52'1.9\"E", "52°14.5′ 5°52.25′",
		"-0.0001 -0.0001", "90 180", "-90 -180", "0:30 0:0:30", "41.714775 -72.727260", "89:59:59.999 179:59:59.999",
	}
	for _, in := range good {
		lat, lon, err := ParseLatLon(in)
		if err != nil {
			t.Errorf("ParseLatLon(%q): %v", in, err)
			continue
		}
		out, err := exec.Command(bin, "-p", "3", "--input-string", in).CombinedOutput()
		f := strings.Fields(string(out))
		if err != nil || len(f) != 2 {
			t.Errorf("GeoConvert %q: %v %s", in, err, out)
			continue
		}
		wlat, _ := strconv.ParseFloat(f[0], 64)
		wlon, _ := strconv.ParseFloat(f[1], 64)
		// GeoConvert -p 3 prints 8 decimals of a degree.
		if math.Abs(lat-wlat) > 1e-8 || math.Abs(lon-wlon) > 1e-8 {
			t.Errorf("%q: ParseLatLon %.8f %.8f, GeoConvert %.8f %.8f", in, lat, lon, wlat, wlon)
		}
		// The comma form reads the same.
		c := strings.Replace(in, " ", ",", 1)
		if la, lo, err := ParseLatLon(c); err != nil || la != lat || lo != lon {
			t.Errorf("ParseLatLon(%q) = %v %v %v, differs from the space form", c, la, lo, err)
		}
	}
	bad := []string{"91 0", "52:60:00N 5E", "52:14:60 5", "abc def", "52N 5N", "5E 52E", "1.5:30 5"}
	for _, in := range bad {
		if lat, lon, err := ParseLatLon(in); err == nil {
			t.Errorf("ParseLatLon(%q) = %v %v, want an error", in, lat, lon)
		}
		if out, err := exec.Command(bin, "--input-string", in).CombinedOutput(); err == nil && !strings.Contains(string(out), "ERROR") {
			t.Errorf("GeoConvert accepts %q (%s): the refusal is ours alone", in, strings.TrimSpace(string(out)))
		}
	}
	// Ours alone, by design: a sign and a hemisphere letter together
	// (GeoConvert reads "-5E" as 5°W), a longitude past ±180 (GeoConvert
	// wraps it), seconds without minutes (GeoConvert adds them to the
	// degrees), a stray value, a missing one.
	for _, in := range []string{"52.1N -5E", "0 181", "52°32.6″ 5", "52.1", "52.1 5.8 3", "", "52.1,", "inf 0", "1e2 0"} {
		if _, _, err := ParseLatLon(in); err == nil || !strings.Contains(err.Error(), "position") {
			t.Errorf("ParseLatLon(%q): %v, want an error naming the position", in, err)
		}
	}
}

func TestParseLatitudeLongitude(t *testing.T) {
	if v, err := ParseLatitude("45°30′S"); err != nil || v != -45.5 {
		t.Errorf("45°30′S: %v %v", v, err)
	}
	if v, err := ParseLongitude("6.1 E"); err != nil || v != 6.1 {
		t.Errorf("6.1 E: %v %v", v, err)
	}
	if _, err := ParseLatitude("6.1E"); err == nil || !strings.Contains(err.Error(), "longitude") {
		t.Errorf("latitude 6.1E: %v", err)
	}
	if _, err := ParseLongitude("-190"); err == nil || !strings.Contains(err.Error(), "±180") {
		t.Errorf("longitude -190: %v", err)
	}
}

// TestParseLatLonCommaForms: the comma-separated decimal positions the
// command line's flags (--station, --tx) took before they used
// ParseLatLon, with the ranges of latitude (±90°) and longitude (±180°)
// by definition of the coordinates.
func TestParseLatLonCommaForms(t *testing.T) {
	cases := []struct {
		in       string
		ok       bool
		lat, lon float64
	}{
		{"46.8127,7.4415", true, 46.8127, 7.4415},
		{" -33.5 , -70.25 ", true, -33.5, -70.25},
		{"90,180", true, 90, 180},
		{"91,0", false, 0, 0},
		{"0,-181", false, 0, 0},
		{"46.8", false, 0, 0},
		{"a,b", false, 0, 0},
		{"NaN,0", false, 0, 0},
		{"1,2,3", false, 0, 0},
		{"abc", false, 0, 0},
	}
	for _, c := range cases {
		lat, lon, err := ParseLatLon(c.in)
		if (err == nil) != c.ok || (c.ok && (lat != c.lat || lon != c.lon)) {
			t.Errorf("ParseLatLon(%q) = %v, %v, %v", c.in, lat, lon, err)
		}
	}
}

func FuzzParseLatLon(f *testing.F) {
	for _, s := range []string{"46.8127,7.4415", "-90,-180", "1e3,0", ",", "0x10,5", "Inf,0", "52:14:32.6N 5:52:01.9E"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		lat, lon, err := ParseLatLon(s)
		if err == nil && !(lat >= -90 && lat <= 90 && lon >= -180 && lon <= 180) {
			t.Fatalf("accepted %q as %v,%v", s, lat, lon)
		}
	})
}

// TestHzFlag: an empty flag is 0; a bad one names the flag.
func TestHzFlag(t *testing.T) {
	if v, err := HzFlag("freq", ""); v != 0 || err != nil {
		t.Errorf("HzFlag(freq, \"\") = %v, %v", v, err)
	}
	if v, err := HzFlag("freq", "144.525MHz"); v != 144.525e6 || err != nil {
		t.Errorf("HzFlag(freq, 144.525MHz) = %v, %v", v, err)
	}
	if _, err := HzFlag("offset", "NaN"); err == nil || !strings.HasPrefix(err.Error(), "--offset: ") {
		t.Errorf("HzFlag(offset, NaN): %v, want an error naming --offset", err)
	}
}

// NonZeroFlag: 0 refused with the flag's name; any other value, negative
// included (its own range check is the owner's), passes.
func TestNonZeroFlag(t *testing.T) {
	if err := NonZeroFlag("period", 0); err == nil || err.Error() != "--period 0: give a positive value" {
		t.Errorf("NonZeroFlag(period, 0) = %v", err)
	}
	for _, v := range []float64{1e-9, 1, -1} {
		if err := NonZeroFlag("period", v); err != nil {
			t.Errorf("NonZeroFlag(period, %g) = %v", v, err)
		}
	}
}
