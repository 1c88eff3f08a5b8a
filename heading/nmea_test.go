package heading

import (
	"bufio"
	"errors"
	"os"
	"strings"
	"testing"
	"time"
)

func TestNMEAChecksum(t *testing.T) {
	// NMEA 0183 sentences and checksums (the HDT one [V]
	// against gpsd 3.22; all three re-checked by testdata/heading/make_nmea.py).
	tests := []struct {
		sentence string
		want     byte
	}{
		{"$GPHDT,274.07,T*03", 0x03},
		{"$APHDM,218.634,M*39", 0x39},
		{"$SDHDG,234.6,,,1.3,E*34", 0x34},
	}
	for _, tc := range tests {
		body := tc.sentence[1:strings.IndexByte(tc.sentence, '*')]
		if got := NMEAChecksum(body); got != tc.want {
			t.Errorf("NMEAChecksum(%q) = %02X, want %02X", body, got, tc.want)
		}
	}
}

// TestParseNMEAFixture reads testdata/heading/hdg_cases.nmea (made by
// make_nmea.py, checksums computed in Python). Expected values are worked
// by hand from the NMEA 0183 HDG field order (as quoted in gpsd
// drivers/driver_nmea0183.c processHDG, 3.22): magnetic = sensor +
// deviation (E+), true = magnetic + variation (E+), true only when
// variation is given.
func TestParseNMEAFixture(t *testing.T) {
	type want struct {
		talker, typ       string
		hasTrue           bool
		trueDeg           float64
		hasMag            bool
		magDeg, sensorDeg float64
	}
	wants := []want{
		{"GP", "HDT", true, 274.07, false, 0, 0},       // NMEA 0183 HDT, [V] gpsd 3.22 ATT heading 274.070
		{"AP", "HDM", false, 0, true, 218.634, 0},      // NMEA 0183 HDM
		{"SD", "HDG", true, 235.9, true, 234.6, 234.6}, // gpsd processHDG example: 234.6 + 1.3 E
		{"HC", "HDG", true, 102.6, true, 98.6, 101.1},  // 101.1 − 2.5 W = 98.6; + 4.0 E = 102.6
		{"HC", "HDG", false, 0, true, 0.5, 359.5},      // 359.5 + 1.0 E wraps to 0.5; no variation
		{"II", "HDG", true, 357.5, true, 10.0, 10.0},   // no deviation; 10.0 − 12.5 W wraps to 357.5
		{"HC", "HDG", true, 0, true, 0, 0},             // all zero
		{"HE", "HDT", true, 0, false, 0, 0},            // 360.0 read as 0 (package rule)
		{"HC", "HDM", false, 0, true, 0.5, 0},          //
		{"GP", "HDT", true, 90, false, 0, 0},           // integer field
	}
	f, err := os.Open("../testdata/heading/hdg_cases.nmea")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	i := 0
	for sc.Scan() {
		line := sc.Text()
		if i >= len(wants) {
			t.Fatalf("fixture has more lines than the table: %q", line)
		}
		w := wants[i]
		i++
		r, err := ParseNMEA(line)
		if err != nil {
			t.Errorf("%q: %v", line, err)
			continue
		}
		if r.Talker != w.talker || r.Type != w.typ || r.HasTrue != w.hasTrue || r.HasMag != w.hasMag ||
			!near(r.TrueDeg, w.trueDeg, 1e-9) || !near(r.MagDeg, w.magDeg, 1e-9) || !near(r.SensorDeg, w.sensorDeg, 1e-9) {
			t.Errorf("%q: got %+v, want %+v", line, r, w)
		}
	}
	if i != len(wants) {
		t.Fatalf("fixture has %d lines, table %d", i, len(wants))
	}
}

func TestParseNMEAErrors(t *testing.T) {
	// Checksum and length rules of NMEA 0183: XOR of the characters between
	// '$' and '*' in two hex digits; at most 82 bytes including '$' and CR LF.
	tests := []struct {
		name, line string
		wantIs     error
		wantSub    string
	}{
		{"bad checksum", "$GPHDT,274.07,T*04", ErrNMEAChecksum, "says 04, computed 03"},
		{"changed digit", "$GPHDT,274.08,T*03", ErrNMEAChecksum, ""},
		{"missing checksum", "$GPHDT,274.07,T", ErrNMEANoChecksum, ""},
		{"one hex digit", "$GPHDT,274.07,T*3", nil, "not 2 hex digits"},
		{"non-hex", "$GPHDT,274.07,T*0G", nil, "not 2 hex digits"},
		{"no dollar", "GPHDT,274.07,T*03", nil, "does not start with '$'"},
		{"too long (81 + CR LF = 83)", "$GPHDT,274.07,T," + strings.Repeat("0", 62) + "*00", nil, "longer than 82"},
		{"unsupported type", sentenceFor("GPGGA,,,,,,0,00,,,M,,M,,"), ErrNMEAUnsupported, "GPGGA"},
		{"short address", sentenceFor("HDT,274.07,T"), nil, "address"},
		{"lowercase address", sentenceFor("gphdt,274.07,T"), nil, "address"},
		{"empty heading", sentenceFor("HEHDT,,T"), nil, "sensor not ready"},
		{"wrong unit", sentenceFor("GPHDT,274.07,M"), nil, "want \"T\""},
		{"negative", sentenceFor("GPHDT,-1.0,T"), nil, "not a decimal"},
		{"above 360", sentenceFor("GPHDT,360.5,T"), nil, "outside [0, 360]"},
		{"NaN", sentenceFor("GPHDT,NaN,T"), nil, "not a decimal"},
		{"exponent", sentenceFor("GPHDT,1e2,T"), nil, "not a decimal"},
		{"too few fields", sentenceFor("HCHDG,10.0,,"), nil, "want 5"},
		{"deviation without direction", sentenceFor("HCHDG,10.0,2.0,,,"), nil, "not E or W"},
		{"direction without deviation", sentenceFor("HCHDG,10.0,,E,,"), nil, "without a value"},
		{"bad variation direction", sentenceFor("HCHDG,10.0,,,3.0,N"), nil, "not E or W"},
		{"control byte", "$GPHDT,27\x014.07,T*02", nil, "non-printable"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := ParseNMEA(tc.line)
			if err == nil {
				t.Fatalf("ParseNMEA(%q) accepted", tc.line)
			}
			if tc.wantIs != nil && !errors.Is(err, tc.wantIs) {
				t.Fatalf("err = %v, want errors.Is %v", err, tc.wantIs)
			}
			if tc.wantSub != "" && !strings.Contains(err.Error(), tc.wantSub) {
				t.Fatalf("err = %v, want containing %q", err, tc.wantSub)
			}
		})
	}
}

// sentenceFor frames body with '$' and its checksum, for error cases whose
// point is not the checksum.
func sentenceFor(body string) string {
	const hex = "0123456789ABCDEF"
	c := NMEAChecksum(body)
	return "$" + body + "*" + string(hex[c>>4]) + string(hex[c&15])
}

func TestParseNMEAAccepts(t *testing.T) {
	tests := []struct {
		name, line string
		trueDeg    float64
	}{
		{"CR LF ending", "$GPHDT,274.07,T*03\r\n", 274.07},
		{"lower-case hex", sentenceFor("GPHDT,274.07,T")[:15] + "*03", 274.07},
		{"extra trailing field ignored", sentenceFor("GPHDT,12.5,T,extra"), 12.5},
		// 80 characters + CR LF = 82 bytes, the NMEA 0183 maximum.
		{"exactly 82 bytes with CR LF", sentenceFor("GPHDT,1.0,T," + strings.Repeat("0", 64)), 1},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			r, err := ParseNMEA(tc.line)
			if err != nil {
				t.Fatal(err)
			}
			if !r.HasTrue || !near(r.TrueDeg, tc.trueDeg, 1e-9) {
				t.Fatalf("got %+v", r)
			}
		})
	}
	if len(sentenceFor("GPHDT,1.0,T,"+strings.Repeat("0", 64))) != 80 {
		t.Fatal("length case is not 80 characters")
	}
}

func TestReadNMEAStampedFixture(t *testing.T) {
	// testdata/heading/compass_stamped.nmea (make_nmea.py): 12 HDT at 2 Hz
	// turning 20°/2 samples clockwise through north, one with a corrupted
	// checksum, one GGA, one garbage line.
	f, err := os.Open("../testdata/heading/compass_stamped.nmea")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	tr, st, err := ReadNMEA(f, NMEAFileOptions{Ref: True, Name: "compass_stamped.nmea", Logger: discardLogger})
	if err != nil {
		t.Fatal(err)
	}
	if st.Lines != 14 || st.Accepted != 11 || st.BadChecksum != 1 || st.Unsupported != 1 || st.Garbage != 1 {
		t.Fatalf("stats %s", st)
	}
	if !strings.Contains(st.FirstProblem, "line 5:") {
		t.Fatalf("first problem %q, want the corrupted line 5", st.FirstProblem)
	}
	// 0.75 s lies between 350° (0.5 s) and 10° (1.0 s): 0°. The 1.5 s
	// sample was dropped (bad checksum), so 1.25 s interpolates 10° (1.0 s)
	// → 50° (2.0 s): 20°.
	tests := []struct{ tS, want float64 }{{0.75, 0}, {1.25, 20}, {0, 330}, {5.5, 190}}
	for _, tc := range tests {
		if got, ok := tr.At(tc.tS); !ok || !near(got, tc.want, 1e-9) {
			t.Errorf("At(%v) = %v, %v; want %v", tc.tS, got, ok, tc.want)
		}
	}
	if sw := tr.Sweeps(); len(sw) != 1 || sw[0].Dir != CW || !near(sw[0].TurnDeg, 220, 1e-9) {
		t.Fatalf("sweeps %+v", sw)
	}
}

func TestReadNMEA(t *testing.T) {
	start := time.Date(2025, 6, 1, 10, 0, 0, 0, time.UTC)
	hdt := "$GPHDT,274.07,T*03" // NMEA 0183 HDT, [V] gpsd 3.22
	hdm := "$APHDM,218.634,M*39"
	hdg := "$SDHDG,234.6,,,1.3,E*34"
	tests := []struct {
		name    string
		in      string
		opts    NMEAFileOptions
		want    []Sample
		wantErr string
	}{
		{"bare sentences paced at 5 Hz", hdt + "\n" + hdg + "\n" + hdt + "\n",
			NMEAFileOptions{Ref: True, PaceHz: 5, StartS: 10}, []Sample{{10, 274.07}, {10.2, 235.9}, {10.4, 274.07}}, ""},
		{"bad line still takes its slot", hdt + "\n$GPHDT,1,T*00\n" + hdt + "\n",
			NMEAFileOptions{Ref: True, PaceHz: 1}, []Sample{{0, 274.07}, {2, 274.07}}, ""},
		{"magnetic track takes HDM and HDG", hdm + "\n" + hdt + "\n" + hdg + "\n",
			NMEAFileOptions{Ref: Magnetic, PaceHz: 1}, []Sample{{0, 218.634}, {2, 234.6}}, ""},
		{"RFC 3339 stamps", "2025-06-01T10:00:01Z " + hdt + "\n2025-06-01T10:00:01.25Z\t" + hdg + "\n",
			NMEAFileOptions{Ref: True, CaptureStart: start}, []Sample{{1, 274.07}, {1.25, 235.9}}, ""},
		{"equal stamp keeps the first", "1 " + hdt + "\n1 " + hdg + "\n",
			NMEAFileOptions{Ref: True}, []Sample{{1, 274.07}}, ""},
		{"missing checksum allowed by option", "$GPHDT,10.5,T\n",
			NMEAFileOptions{Ref: True, PaceHz: 1, AllowMissingChecksum: true}, []Sample{{0, 10.5}}, ""},
		{"missing checksum rejected by default", "$GPHDT,10.5,T\n",
			NMEAFileOptions{Ref: True, PaceHz: 1}, nil, "1 without checksum"},
		{"bare without pace", hdt + "\n", NMEAFileOptions{Ref: True}, nil, "give the rate they were logged at with --nmea-rate HZ"},
		{"RFC 3339 without capture start", "2025-06-01T10:00:01Z " + hdt + "\n", NMEAFileOptions{Ref: True}, nil, "line 1: time"},
		{"mixed forms: the stamped readings win", "0 " + hdt + "\n" + hdt + "\n", NMEAFileOptions{Ref: True, PaceHz: 1}, []Sample{{0, 274.07}}, ""},
		{"a stamp going back is skipped", "0 " + hdt + "\n2 " + hdt + "\n1 " + hdt + "\n", NMEAFileOptions{Ref: True}, []Sample{{0, 274.07}, {2, 274.07}}, ""},
		{"only magnetic for a true track", hdm + "\n", NMEAFileOptions{Ref: True, PaceHz: 1}, nil, "no usable true heading sentences (1 lines: 0 accepted"},
		{"only garbage", "hello\nworld 1\n", NMEAFileOptions{Ref: True, PaceHz: 1}, nil, "2 garbage"},
		{"empty", "", NMEAFileOptions{Ref: True, PaceHz: 1}, nil, "0 lines"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			opts := tc.opts
			opts.Logger = discardLogger
			tr, _, err := ReadNMEA(strings.NewReader(tc.in), opts)
			if tc.wantErr != "" {
				if err == nil || !strings.Contains(err.Error(), tc.wantErr) {
					t.Fatalf("err = %v, want containing %q", err, tc.wantErr)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if len(tr.Samples) != len(tc.want) {
				t.Fatalf("samples %v, want %v", tr.Samples, tc.want)
			}
			for i := range tc.want {
				if !near(tr.Samples[i].T, tc.want[i].T, 1e-9) || !near(tr.Samples[i].Deg, tc.want[i].Deg, 1e-9) {
					t.Fatalf("sample %d = %v, want %v", i, tr.Samples[i], tc.want[i])
				}
			}
			if tr.Ref != tc.opts.Ref {
				t.Fatal("ref")
			}
		})
	}
}

func FuzzParseNMEA(f *testing.F) {
	for _, s := range []string{
		"$GPHDT,274.07,T*03", "$APHDM,218.634,M*39", "$SDHDG,234.6,,,1.3,E*34",
		"$HCHDG,101.1,2.5,W,4.0,E*52", "$GPHDT,274.07,T", "$GPHDT,,T*", "$*00", "",
	} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, line string) {
		r, err := ParseNMEA(line)
		if err != nil {
			return
		}
		for _, d := range []float64{r.TrueDeg, r.MagDeg, r.SensorDeg} {
			if !(d >= 0 && d < 360) {
				t.Fatalf("%q: heading %v outside [0, 360)", line, d)
			}
		}
		if !r.HasTrue && !r.HasMag {
			t.Fatalf("%q: accepted without any heading", line)
		}
		// An accepted sentence carries a checksum that matches (NMEA 0183 checksum).
		s := strings.TrimRight(line, "\r\n ")
		star := strings.IndexByte(s, '*')
		if star < 0 || star+3 != len(s) {
			t.Fatalf("%q: accepted without a *hh checksum", line)
		}
		if !strings.EqualFold(sentenceFor(s[1:star]), s) {
			t.Fatalf("%q: accepted with a wrong checksum", line)
		}
	})
}

func FuzzReadNMEA(f *testing.F) {
	for _, s := range []string{
		"0 $GPHDT,274.07,T*03\n1 $SDHDG,234.6,,,1.3,E*34\n",
		"$GPHDT,274.07,T*03\n$GPHDT,1,T*00\n",
		"2025-06-01T10:00:01Z $GPHDT,274.07,T*03\n", "", "x\n",
	} {
		f.Add(s)
	}
	start := time.Date(2025, 6, 1, 10, 0, 0, 0, time.UTC)
	f.Fuzz(func(t *testing.T, in string) {
		tr, st, err := ReadNMEA(strings.NewReader(in), NMEAFileOptions{Ref: True, PaceHz: 2, CaptureStart: start, Logger: discardLogger})
		if err != nil {
			return
		}
		if err := tr.Validate(); err != nil {
			t.Fatal(err)
		}
		if st.Accepted != len(tr.Samples) {
			t.Fatalf("accepted %d, samples %d", st.Accepted, len(tr.Samples))
		}
	})
}
