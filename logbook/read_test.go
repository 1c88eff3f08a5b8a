package logbook

import (
	"bytes"
	"encoding/json"
	"math"
	"strings"
	"testing"
	"time"

	"nullseek/store"
)

// A bearing of a moving station whose position was not known is read back
// with NaN coordinates (store.Bearing.NoPosition); its JSON line leaves
// lat/lon out instead of failing on NaN (encoding/json refuses NaN), and a
// placed bearing's line carries them, in the bearing line's keys.
func TestWriteBearingsJSONNoPosition(t *testing.T) {
	at := time.Date(2026, 5, 16, 9, 0, 1, 0, time.UTC)
	alt := 48.25
	bs := []store.Bearing{
		{Time: at, StationName: "walker", Ident: "N0CALL", TrueDeg: 123.456, SigmaDeg: 0.8123,
			StationLatDeg: math.NaN(), StationLonDeg: math.NaN(), NoPosition: true},
		{Time: at, StationName: "mast", Ident: "N0CALL", TrueDeg: 10, SigmaDeg: 2,
			StationLatDeg: 52.1234567, StationLonDeg: 5.7654321, StationAltM: &alt},
	}
	var out bytes.Buffer
	if err := WriteBearingsJSON(&out, bs); err != nil {
		t.Fatalf("WriteBearingsJSON: %v", err)
	}
	lines := strings.Split(strings.TrimSpace(out.String()), "\n")
	if len(lines) != 2 {
		t.Fatalf("%d lines, want 2:\n%s", len(lines), out.String())
	}
	var a, b map[string]any
	if json.Unmarshal([]byte(lines[0]), &a) != nil || json.Unmarshal([]byte(lines[1]), &b) != nil {
		t.Fatalf("not JSON:\n%s", out.String())
	}
	if _, ok := a["lat"]; ok || a["type"] != "stored_bearing" || a["bearing_deg"] != 123.46 || a["sigma_deg"] != 0.812 {
		t.Errorf("unplaced bearing line: %s", lines[0])
	}
	if b["lat"] != 52.123457 || b["lon"] != 5.765432 || b["alt_m"] != 48.3 || b["time"] != "2026-05-16T09:00:01.000Z" {
		t.Errorf("placed bearing line: %s", lines[1])
	}
}
