package station

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"nullseek/internal/testtool"
	"nullseek/internal/units"
)

const example = "../testdata/station/kestrel-ridge.toml"

func TestExampleFiles(t *testing.T) {
	f, err := Load(example)
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Dir(example)
	if f.Name != "Kestrel Ridge" || f.Database != filepath.Join(dir, "kestrel-ridge.db") {
		t.Errorf("name/database: %q %q", f.Name, f.Database)
	}
	p := f.Position
	if p.Source != PositionFixed || !p.HasLatLon || p.LatDeg != 45.125 || p.LonDeg != 6.0625 || *p.AltM != 412 || *p.DeclinationDeg != 2.9 {
		t.Errorf("position: %+v", p)
	}
	if f.Antenna != (Antenna{Kind: AntennaLoop}) {
		t.Errorf("antenna: %+v", f.Antenna)
	}
	want := Receiver{Source: "rtl_tcp://127.0.0.1:1234", RTLTCP: "127.0.0.1:1234", USBIndex: -1, SampleRateHz: 2.4e6, CentreHz: 144.4e6, GainDB: 30}
	if f.Receiver != want {
		t.Errorf("receiver: %+v, want %+v", f.Receiver, want)
	}
	if !reflect.DeepEqual(f.Channels, []Channel{{FreqHz: 144.525e6, Mode: "auto", IDs: []string{"N0CALL/1", "N0CALL/2", "N0CALL/3"}}}) {
		t.Errorf("channels: %+v", f.Channels)
	}
	if f.Heading != (Heading{Source: HeadingRotator, Reference: "true", Rotator: "127.0.0.1:4533", SweepToDeg: 360}) {
		t.Errorf("heading: %+v", f.Heading)
	}
	if len(f.Warnings) != 0 {
		t.Errorf("warnings: %v", f.Warnings)
	}

	w, err := Load("../testdata/station/walker.toml")
	if err != nil {
		t.Fatal(err)
	}
	if w.Position.Source != PositionGPSD || w.Position.HasLatLon || w.Position.GPSD != "127.0.0.1:2947" ||
		w.Antenna.MountOffsetDeg != -90 || w.Receiver.USBIndex != 0 || w.Receiver.SampleRateHz != 1024000 || w.Receiver.PPM != -12 ||
		len(w.Channels) != 2 || w.Channels[0].FreqHz != 144525000 || w.Channels[1].FreqHz != 145e6 || w.Receiver.CentreHz != 144.8e6 || w.Channels[1].Mode != "cw" ||
		w.Heading.Compass != "udp://:10110" || w.Heading.Reference != "magnetic" || w.Heading.LagS != 0.25 ||
		w.Database != filepath.Join(dir, "../hunt/hunt.db") {
		t.Errorf("walker: %+v", w)
	}
}

// TestExamplesAgainstTomllib: what Load reads is what Python's own TOML
// reader (tomllib, Python 3.11 standard library) reads from the same
// files, key for key; and the line Load names for every key is a line
// that writes that key.
func TestExamplesAgainstTomllib(t *testing.T) {
	py := testtool.Need(t, testtool.DebianPython, "-c", "import tomllib")
	for _, path := range []string{example, "../testdata/station/walker.toml"} {
		out, err := exec.Command(py, "-c", "import json, sys, tomllib; json.dump(tomllib.load(open(sys.argv[1], 'rb')), sys.stdout)", path).Output()
		if err != nil {
			t.Fatalf("tomllib %s: %v", path, err)
		}
		var doc map[string]any
		if err := json.Unmarshal(out, &doc); err != nil {
			t.Fatal(err)
		}
		f, err := Load(path)
		if err != nil {
			t.Fatal(err)
		}
		get := func(table, key string) any {
			if table == "" {
				return doc[key]
			}
			m, _ := doc[table].(map[string]any)
			return m[key]
		}
		num := func(x any) float64 { v, _ := x.(float64); return v }
		hz := func(x any) float64 {
			if s, ok := x.(string); ok {
				v, err := units.ParseHz(s)
				if err != nil {
					t.Fatal(err)
				}
				return v
			}
			return num(x)
		}
		if f.Name != get("", "name") || filepath.Base(f.Database) != filepath.Base(get("", "database").(string)) {
			t.Errorf("%s: name/database differ from tomllib", path)
		}
		if f.Receiver.Source != get("receiver", "source") || f.Receiver.GainDB != num(get("receiver", "gain_db")) ||
			float64(f.Receiver.PPM) != num(get("receiver", "ppm")) || f.Receiver.SampleRateHz != hz(get("receiver", "sample_rate")) {
			t.Errorf("%s: receiver %+v differs from tomllib %v", path, f.Receiver, doc["receiver"])
		}
		if f.Antenna.Kind != get("antenna", "kind") || f.Antenna.MountOffsetDeg != num(get("antenna", "mount_offset_deg")) {
			t.Errorf("%s: antenna %+v differs from tomllib %v", path, f.Antenna, doc["antenna"])
		}
		if f.Heading.Source != get("heading", "source") || f.Heading.LagS != num(get("heading", "lag_s")) {
			t.Errorf("%s: heading %+v differs from tomllib %v", path, f.Heading, doc["heading"])
		}
		if s, ok := get("position", "lat_lon").(string); ok {
			lat, lon, _ := units.ParseLatLon(s)
			if f.Position.LatDeg != lat || f.Position.LonDeg != lon {
				t.Errorf("%s: position differs from tomllib's %q", path, s)
			}
		}
		chans, _ := doc["channel"].([]any)
		if len(chans) != len(f.Channels) {
			t.Fatalf("%s: %d channels, tomllib %d", path, len(f.Channels), len(chans))
		}
		for i, c := range chans {
			m := c.(map[string]any)
			var ids []string
			if l, ok := m["ids"].([]any); ok {
				for _, x := range l {
					ids = append(ids, x.(string))
				}
			}
			if f.Channels[i].FreqHz != hz(m["freq"]) || !reflect.DeepEqual(f.Channels[i].IDs, ids) && len(ids)+len(f.Channels[i].IDs) > 0 {
				t.Errorf("%s: channel %d %+v differs from tomllib %v", path, i+1, f.Channels[i], m)
			}
		}
		// Every key tomllib found has a line in our index, and that line
		// writes the key.
		data, _ := os.ReadFile(path)
		lines := strings.Split(string(data), "\n")
		index := keyLines(data)
		var walk func(prefix string, m map[string]any)
		walk = func(prefix string, m map[string]any) {
			for k, v := range m {
				key := k
				if prefix != "" {
					key = prefix + "." + k
				}
				switch x := v.(type) {
				case map[string]any:
					walk(key, x)
					continue
				case []any:
					if len(x) > 0 {
						if _, ok := x[0].(map[string]any); ok {
							for i, e := range x {
								walk(fmt.Sprintf("%s[%d]", key, i+1), e.(map[string]any))
							}
							continue
						}
					}
				}
				n := index[key]
				if n == 0 || !strings.HasPrefix(strings.TrimSpace(lines[n-1]), k+" ") {
					t.Errorf("%s: key %s: index says line %d", path, key, n)
				}
			}
		}
		walk("", doc)
	}
}

// mutate returns the example with each old line replaced by new.
func mutate(t *testing.T, pairs ...string) []byte {
	t.Helper()
	data, err := os.ReadFile(example)
	if err != nil {
		t.Fatal(err)
	}
	s := string(data)
	for i := 0; i+1 < len(pairs); i += 2 {
		if !strings.Contains(s, pairs[i]) {
			t.Fatalf("example lacks %q", pairs[i])
		}
		s = strings.Replace(s, pairs[i], pairs[i+1], 1)
	}
	return []byte(s)
}

// lineOfText is the 1-based line of the first occurrence of s.
func lineOfText(data []byte, s string) int {
	i := strings.Index(string(data), s)
	if i < 0 {
		return 0
	}
	return strings.Count(string(data[:i]), "\n") + 1
}

func TestErrors(t *testing.T) {
	gain := "gain_db = 30.0                  # fixed tuner gain (0–50 dB)"
	for _, tc := range []struct {
		name   string
		pairs  []string
		at     string // text on the line the error must name ("" for none)
		key    string
		reason string
	}{
		{"unknown key", []string{gain, gain + "\ngian_db = 30"}, "gian_db", "receiver.gian_db", "unknown key"},
		{"unknown table", []string{"[heading]", "[headings]"}, "[headings]", "headings", "unknown key"},
		{"two unknown", []string{gain, gain + "\ngian_db = 30\nbogus = 1"}, "gian_db", "receiver.gian_db", "and 1 more"},
		{"wrong type", []string{gain, `gain_db = "thirty"`}, `"thirty"`, "receiver.gain_db", "a TOML string where a number is wanted"},
		{"whole number", []string{"ppm = 0 ", "ppm = 1.5 "}, "ppm = 1.5", "receiver.ppm", "whole number"},
		{"gain range", []string{gain, "gain_db = 80"}, "gain_db = 80", "receiver.gain_db", "outside 0–50"},
		{"gain NaN", []string{gain, "gain_db = nan"}, "gain_db = nan", "receiver.gain_db", "outside 0–50"},
		{"gain missing", []string{gain, ""}, "[receiver]", "receiver.gain_db", "missing"},
		{"agc and gain", []string{"agc = false", "agc = true"}, gain, "receiver.gain_db", "AGC"},
		{"rate", []string{`sample_rate = "2.4M"`, `sample_rate = "500k"`}, `"500k"`, "receiver.sample_rate", "RTL-SDR accepts"},
		{"milli", []string{`freq = "144.525MHz"`, `freq = "144.525mHz"`}, `"144.525mHz"`, "channel[1].freq", "m is milli"},
		{"furlongs", []string{`freq = "144.525MHz"`, `freq = "5 furlongs"`}, "furlongs", "channel[1].freq", "unknown unit"},
		{"freq bool", []string{`freq = "144.525MHz"`, `freq = true`}, "freq = true", "channel[1].freq", "want a frequency"},
		{"outside band", []string{`freq = "144.525MHz"`, `freq = "146.0MHz"`}, `"146.0MHz"`, "channel[1].freq", "outside the band"},
		{"band edge", []string{`freq = "144.525MHz"`, `freq = "145.590MHz"`}, `"145.590MHz"`, "channel[1].freq", "must lie inside 144400000 ± 1200000 Hz"},
		{"two, no centre", []string{`centre = "144.4MHz"`, "", `mode = "auto"`, "mode = \"auto\"\n[[channel]]\nfreq = \"144.6MHz\""}, "[receiver]", "receiver.centre", "a station file with 2 channels"},
		{"second outside", []string{`mode = "auto"`, "mode = \"auto\"\n[[channel]]\nfreq = \"145.7MHz\""}, `"145.7MHz"`, "channel[2].freq", "outside the band received"},
		{"overlap", []string{`mode = "auto"`, "mode = \"auto\"\n[[channel]]\nfreq = \"144.540MHz\""}, `"144.540MHz"`, "channel[2].freq", "overlaps channel 1 (144525000 Hz)"},
		{"dup channel", []string{`mode = "auto"`, "mode = \"auto\"\n[[channel]]\nfreq = 144525000"}, "freq = 144525000", "channel[2].freq", "also channel 1"},
		{"mode", []string{`mode = "auto"`, `mode = "ssb"`}, `"ssb"`, "channel[1].mode", "want auto, fm, am or cw"},
		{"dup id", []string{`"N0CALL/3"]`, `"n0call/1"]`}, "ids =", "channel[1].ids", "listed twice"},
		{"id space", []string{`"N0CALL/3"]`, `"N0 CALL"]`}, "ids =", "channel[1].ids", "without spaces"},
		{"lat", []string{`lat_lon = "45.1250, 6.0625"`, `lat_lon = "91, 6"`}, "lat_lon", "position.lat_lon", "outside ±90"},
		{"fixed no pos", []string{`lat_lon = "45.1250, 6.0625"`, ""}, "[position]", "position.lat_lon", "missing"},
		{"gpsd no addr", []string{`source = "fixed"`, `source = "gpsd"`}, "[position]", "position.gpsd", "HOST:PORT"},
		{"position source", []string{`source = "fixed"`, `source = "star"`}, `"star"`, "position.source", "want fixed, gpsd or nmea"},
		{"alt", []string{"alt_m = 412", "alt_m = 41200"}, "alt_m", "position.alt_m", "outside"},
		{"decl", []string{"declination_deg = 2.9", "declination_deg = inf"}, "declination_deg", "position.declination_deg", "outside"},
		{"antenna", []string{`kind = "loop"`, `kind = "dish"`}, `"dish"`, "antenna.kind", "want loop, yagi, body or pattern"},
		{"pattern file", []string{`kind = "loop"`, `kind = "pattern"`}, "[antenna]", "antenna.pattern_file", "missing"},
		{"pattern absent", []string{`kind = "loop"`, "kind = \"pattern\"\npattern_file = \"nope.json\""}, "pattern_file", "antenna.pattern_file", "no such file"},
		{"offset NaN", []string{"mount_offset_deg = 0.0", "mount_offset_deg = nan"}, "mount_offset_deg", "antenna.mount_offset_deg", "outside"},
		{"receiver source", []string{`source = "rtl_tcp://127.0.0.1:1234"`, `source = "rtl_tcp://127.0.0.1"`}, "rtl_tcp://127.0.0.1", "receiver.source", "HOST:PORT"},
		{"usb", []string{`source = "rtl_tcp://127.0.0.1:1234"`, `source = "usb:x"`}, "usb:x", "receiver.source", "usb:INDEX"},
		{"heading source", []string{`source = "rotator"`, `source = "sun"`}, `"sun"`, "heading.source", "want rotator, compass or log"},
		{"no turn", []string{"sweep_to_deg = 360.0", "sweep_to_deg = 0"}, "sweep_to_deg", "heading.sweep_to_deg", "would not turn"},
		{"sweep range", []string{"sweep_to_deg = 360.0", "sweep_to_deg = 720"}, "sweep_to_deg", "heading.sweep_to_deg", "outside -180…450"},
		{"step sign", []string{"step_deg = 0.0 ", "step_deg = -10 "}, "step_deg", "heading.step_deg", "does not lead"},
		{"dwell", []string{"dwell_s = 0.0 ", "dwell_s = 5 "}, "dwell_s", "heading.dwell_s", "only with step_deg"},
		{"compass too", []string{"# compass =", "compass ="}, "compass =", "heading.compass", "is given with source"},
		{"reference", []string{`reference = "true"`, `reference = "grid"`}, `"grid"`, "heading.reference", "want true or magnetic"},
		{"lag", []string{"lag_s = 0.0", "lag_s = 60"}, "lag_s", "heading.lag_s", "outside"},
		{"no name", []string{`name = "Kestrel Ridge"`, ""}, "", "name", "missing"},
		{"control char", []string{`name = "Kestrel Ridge"`, `name = "Kestrel\tRidge"`}, "name =", "name", "control character"},
		{"no database", []string{`database = "kestrel-ridge.db"`, ""}, "", "database", "missing"},
		{"no channel", []string{"\n[[channel]]\n", "\n", `freq = "144.525MHz"`, "", `mode = "auto"`, "", `ids = ["N0CALL/1", "N0CALL/2", "N0CALL/3"]`, ""}, "", "channel", "missing"},
		{"duplicate key", []string{`name = "Kestrel Ridge"`, "name = \"Kestrel Ridge\"\nname = \"Other\""}, `name = "Other"`, "name", "already defined"},
		{"syntax", []string{"ppm = 0 ", "ppm = = 0 "}, "ppm = = 0", "", ""},
	} {
		data := mutate(t, tc.pairs...)
		_, err := Parse(data, "kestrel.toml")
		var se *Error
		if !errors.As(err, &se) {
			t.Errorf("%s: %v, want a *station.Error", tc.name, err)
			continue
		}
		msg := err.Error()
		if strings.Contains(msg, "\n") {
			t.Errorf("%s: error has several lines: %q", tc.name, msg)
		}
		if want := lineOfText(data, tc.at); tc.at != "" && se.Line != want {
			t.Errorf("%s: %q names line %d, want %d", tc.name, msg, se.Line, want)
		}
		if tc.key != "" && se.Key != tc.key {
			t.Errorf("%s: %q names key %q, want %q", tc.name, msg, se.Key, tc.key)
		}
		if !strings.Contains(msg, tc.reason) || !strings.HasPrefix(msg, "kestrel.toml:") {
			t.Errorf("%s: %q does not start with the file or say %q", tc.name, msg, tc.reason)
		}
	}
}

func TestWarningsAndMore(t *testing.T) {
	gain := "gain_db = 30.0                  # fixed tuner gain (0–50 dB)"
	f, err := Parse(mutate(t, gain, "", "agc = false", "agc = true"), "k.toml")
	if err != nil {
		t.Fatal(err)
	}
	if !f.Receiver.AGC || len(f.Warnings) != 1 || !strings.Contains(f.Warnings[0], "distorts") {
		t.Errorf("AGC: %+v %v", f.Receiver, f.Warnings)
	}
	// A pattern file that exists, relative to the station file.
	dir := t.TempDir()
	os.WriteFile(filepath.Join(dir, "loop.json"), []byte("{}"), 0o644)
	f, err = Parse(mutate(t, `kind = "loop"`, "kind = \"pattern\"\npattern_file = \"loop.json\""), filepath.Join(dir, "s.toml"))
	if err != nil || f.Antenna.PatternFile != filepath.Join(dir, "loop.json") {
		t.Errorf("pattern: %+v %v", f, err)
	}
	// A number frequency, a DMS position.
	f, err = Parse(mutate(t, `freq = "144.525MHz"`, "freq = 144525000.0", `lat_lon = "45.1250, 6.0625"`, `lat_lon = "45:07:30N 6:03:45E"`), "k.toml")
	if err != nil || f.Channels[0].FreqHz != 144525000 || math.Abs(f.Position.LatDeg-45.125) > 1e-12 || math.Abs(f.Position.LonDeg-6.0625) > 1e-12 {
		t.Errorf("number frequency / DMS: %+v %v", f, err)
	}
	if _, err := Load(filepath.Join(dir, "absent.toml")); err == nil || !strings.Contains(err.Error(), "absent.toml") {
		t.Errorf("absent file: %v", err)
	}
	big := filepath.Join(dir, "big.toml")
	os.WriteFile(big, make([]byte, MaxFileBytes+1), 0o644)
	if _, err := Load(big); err == nil || !strings.Contains(err.Error(), "too large") {
		t.Errorf("big file: %v", err)
	}
}

func FuzzParse(f *testing.F) {
	data, _ := os.ReadFile(example)
	f.Add(data)
	f.Add([]byte("name = 1\n[[channel]]\nfreq = nan\n"))
	f.Fuzz(func(t *testing.T, b []byte) {
		sf, err := Parse(b, "fuzz.toml")
		if err != nil {
			if strings.Contains(err.Error(), "\n") {
				t.Fatalf("error with several lines: %q", err)
			}
			return
		}
		for _, c := range sf.Channels {
			if !(c.FreqHz > 0) || math.IsInf(c.FreqHz, 0) {
				t.Fatalf("accepted frequency %v", c.FreqHz)
			}
		}
	})
}

// TestChannelsInOneBand: channels 25 kHz apart (a common 2 m channel
// spacing, common practice) and channels near either edge of the band
// received are taken; the band's edge and the spacing follow
// ChannelHalfWidthHz exactly (2 × 12 kHz apart is enough, one hertz less
// is not).
func TestChannelsInOneBand(t *testing.T) {
	add := func(freqs ...string) string {
		s := `mode = "auto"`
		for _, f := range freqs {
			s += "\n[[channel]]\nfreq = \"" + f + "\""
		}
		return s
	}
	f, err := Parse(mutate(t, `mode = "auto"`, add("144.550MHz", "145.588MHz", "143.212MHz")), "kestrel.toml")
	if err != nil {
		t.Fatal(err)
	}
	if len(f.Channels) != 4 || f.Channels[1].FreqHz != 144.55e6 || f.Channels[2].FreqHz != 145.588e6 || f.Channels[3].FreqHz != 143.212e6 {
		t.Errorf("channels: %+v", f.Channels)
	}
	if _, err := Parse(mutate(t, `mode = "auto"`, add("144.549MHz")), "kestrel.toml"); err != nil {
		t.Errorf("24 kHz apart: %v", err)
	}
	if _, err := Parse(mutate(t, `mode = "auto"`, add("144548999")), "kestrel.toml"); err == nil || !strings.Contains(err.Error(), "overlaps channel 1") {
		t.Errorf("one hertz closer than 24 kHz: %v", err)
	}
}
