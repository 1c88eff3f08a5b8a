package station

import (
	"path/filepath"
	"strings"
	"testing"

	"nullseek/internal/units"
)

// TestSettingsParseBack: every value Settings gives for the documented
// example reads back, through the parser that owns the flag's grammar
// (units.ParseHz, units.ParseLatLon), as the value the file holds; the
// live-only keys (receiver, rotator) give no setting.
func TestSettingsParseBack(t *testing.T) {
	f, err := Load(filepath.Join("..", "testdata", "station", "kestrel-ridge.toml"))
	if err != nil {
		t.Fatal(err)
	}
	got := map[string]string{}
	for _, s := range f.Settings() {
		if _, dup := got[s.Flag]; dup {
			t.Errorf("--%s given twice", s.Flag)
		}
		got[s.Flag] = s.Value
	}
	if hz, err := units.ParseHz(got["freq"]); err != nil || hz != f.Channels[0].FreqHz {
		t.Errorf("--freq %q reads back as %v (%v), the file says %v Hz", got["freq"], hz, err, f.Channels[0].FreqHz)
	}
	if lat, lon, err := units.ParseLatLon(got["station"]); err != nil || lat != f.Position.LatDeg || lon != f.Position.LonDeg {
		t.Errorf("--station %q reads back as %v, %v (%v), the file says %v, %v", got["station"], lat, lon, err, f.Position.LatDeg, f.Position.LonDeg)
	}
	if got["ids"] != strings.Join(f.Channels[0].IDs, ",") || got["antenna"] != f.Antenna.Kind || got["heading-ref"] != f.Heading.Reference ||
		got["db"] != f.Database || got["declination"] != "2.9" || got["mode"] != f.Channels[0].Mode {
		t.Errorf("settings %v do not say the file's ids, antenna, heading reference, database, declination and mode", got)
	}
	for _, live := range []string{"rotator", "gain", "ppm", "headings", "mount-offset", "lag"} {
		if v, ok := got[live]; ok {
			t.Errorf("--%s %q: the example gives no such value for a one-shot command", live, v)
		}
	}
}
