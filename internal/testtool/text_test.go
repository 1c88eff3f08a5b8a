package testtool

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestEditDistance(t *testing.T) {
	for _, c := range []struct {
		a, b string
		want int
	}{
		{"", "", 0}, {"ABC", "", 3}, {"", "AB", 2}, {"KITTEN", "SITTING", 3}, // textbook example (common practice)
		{"N0CALL/2", "N0CALL/2", 0}, {"N0CALL/2", "N0CAL/2", 1}, {"N0CALL/2", "N0CALLX/2", 1}, {"ÅB", "AB", 1},
	} {
		if got := EditDistance([]rune(c.a), []rune(c.b)); got != c.want {
			t.Errorf("EditDistance(%q, %q) = %d, want %d", c.a, c.b, got, c.want)
		}
		if got := EditDistance([]rune(c.b), []rune(c.a)); got != c.want {
			t.Errorf("EditDistance(%q, %q) = %d, want %d", c.b, c.a, got, c.want)
		}
	}
}

func TestCERErrors(t *testing.T) {
	for _, c := range []struct {
		got, ref string
		want     int
	}{
		{"n0call 2", "N0CALL2", 0},        // case and spaces do not count
		{"N0CAL", "N0CALL", 1},            // one deletion
		{"XXXXXXXXXXXXXXXX", "N0CALL", 6}, // capped at the reference length
	} {
		if got := CERErrors(c.got, c.ref); got != c.want {
			t.Errorf("CERErrors(%q, %q) = %d, want %d", c.got, c.ref, got, c.want)
		}
	}
}

func TestTSVRows(t *testing.T) {
	p := filepath.Join(t.TempDir(), "m.tsv")
	if err := os.WriteFile(p, []byte("file\ttext\na.wav\tN0CALL\nb.wav\t\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	rows := TSVRows(t, p)
	if len(rows) != 2 || rows[0]["file"] != "a.wav" || rows[0]["text"] != "N0CALL" || rows[1]["text"] != "" {
		t.Errorf("rows = %v", rows)
	}
}

func TestNMEASentence(t *testing.T) {
	// NMEA 0183 HDT $GPHDT,274.07,T*03 (checked with gpsd 3.22), HDM
	// $APHDM,218.634,M*39 from gpsd's NMEA notes, HDG
	// $SDHDG,234.6,,,1.3,E*34 (gpsd driver_nmea0183.c processHDG).
	for _, want := range []string{"$GPHDT,274.07,T*03\r\n", "$APHDM,218.634,M*39\r\n", "$SDHDG,234.6,,,1.3,E*34\r\n"} {
		if got := NMEASentence(want[1:strings.IndexByte(want, '*')]); got != want {
			t.Errorf("NMEASentence = %q, want %q", got, want)
		}
	}
}
