package watch

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"nullseek/sdr"
	"nullseek/station"
	"nullseek/store"
)

// baseStation is a valid station file for the tests that need no network;
// each case replaces one line.
const baseStation = `name = "Opt"
database = "opt.db"
[position]
source = "fixed"
lat_lon = "45.0, 6.0"
[antenna]
kind = "loop"
[receiver]
source = "rtl_tcp://127.0.0.1:1"
sample_rate = 240000
centre = 144400000
gain_db = 30
[[channel]]
freq = 144425000
[heading]
source = "rotator"
reference = "true"
rotator = "127.0.0.1:1"
sweep_from_deg = 0.0
sweep_to_deg = 360.0
`

func loadStation(t testing.TB, toml string) (*station.File, *store.DB) {
	t.Helper()
	dir := t.TempDir()
	path := filepath.Join(dir, "st.toml")
	if err := os.WriteFile(path, []byte(toml), 0o644); err != nil {
		t.Fatal(err)
	}
	// The heading log a "log" case names (heading.WriteLog's form).
	if err := os.WriteFile(filepath.Join(dir, "h.csv"), []byte("seconds,heading_deg\n0.0,0.000\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	st, err := station.Load(path)
	if err != nil {
		t.Fatal(err)
	}
	db, err := store.Open(st.Database, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { db.Close() })
	return st, db
}

// TestWatchRefuses: a station file watch cannot run is refused before
// anything is dialled, with one line naming the file and the key (the
// project's bad-input rule), and the database is left untouched.
func TestWatchRefuses(t *testing.T) {
	for _, c := range []struct{ name, from, to, want string }{
		{"a heading log", "source = \"rotator\"\nreference = \"true\"\nrotator = \"127.0.0.1:1\"\nsweep_from_deg = 0.0\nsweep_to_deg = 360.0\n", "source = \"log\"\nreference = \"true\"\nlog = \"h.csv\"\n", "heading.source"},
		{"an NMEA position over UDP", `source = "fixed"` + "\nlat_lon = \"45.0, 6.0\"", `source = "nmea"` + "\nnmea = \"udp://:10110\"", "position.nmea"},
	} {
		t.Run(c.name, func(t *testing.T) {
			toml := strings.Replace(baseStation, c.from, c.to, 1)
			if toml == baseStation {
				t.Fatalf("case does not change the file")
			}
			st, db := loadStation(t, toml)
			_, err := Run(context.Background(), Options{Station: st, DB: db})
			if err == nil {
				t.Fatal("accepted")
			}
			msg := err.Error()
			if strings.Contains(msg, "\n") || !strings.Contains(msg, st.Path) || !strings.Contains(msg, c.want) {
				t.Errorf("error %q: want one line naming %s and %s", msg, st.Path, c.want)
			}
			if n, _ := db.Counts(); n["stations"] != 0 || n["captures"] != 0 {
				t.Errorf("the refused watch wrote %v", n)
			}
		})
	}
	st, db := loadStation(t, baseStation)
	if _, err := Run(context.Background(), Options{Station: st, DB: db, DurationS: -1}); err == nil || !strings.Contains(err.Error(), "--duration") {
		t.Errorf("a negative duration: %v", err)
	}
}

// TestWatchWarnsAGC: a station with the tuner's automatic gain on is
// watched, with the station file's warning that AGC distorts the level
// readings in the log, and the receiver is asked for automatic gain.
func TestWatchWarnsAGC(t *testing.T) {
	st, db := loadStation(t, strings.Replace(baseStation, "gain_db = 30", "agc = true", 1))
	var log syncBuffer
	src := newNoiseSource(240000, 3*240000)
	sum, err := Run(context.Background(), Options{Station: st, DB: db, Log: &log, Open: func(_ context.Context, cfg sdr.RTLConfig) (sdr.Source, error) {
		if !cfg.AutoGain {
			t.Error("agc = true did not ask the receiver for automatic gain")
		}
		return src, nil
	}})
	if err != nil {
		t.Fatal(err)
	}
	out := log.String()
	if !strings.Contains(out, "warning: "+st.Path+": receiver.agc") {
		t.Errorf("no AGC warning in the log:\n%s", out)
	}
	if sum.Samples != 3*240000 {
		t.Errorf("watched %d samples, want %d", sum.Samples, 3*240000)
	}
}
