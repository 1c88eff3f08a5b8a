package capture

import (
	"bytes"
	"context"
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"nullseek/heading"
	"nullseek/internal/testtool"
	"nullseek/sdr"
)

// TestRunRecordDir: --record naming a directory keeps a 2.5 s capture as
// SigMF pairs rolled over every second, with the heading log beside the
// first. Joined in order, the pairs' data files are exactly the paced
// source's cu8 codes; each metadata file, read by its key names (SigMF
// v1.2.5 global object), has core:sha512 equal to what coreutils
// sha512sum computes of its data file, core:geolocation the GeoJSON Point
// given (RFC 7946 §3.1.2: [longitude, latitude]) and its pair's start in
// core:datetime, one second after the last.
func TestRunRecordDir(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	o := testOptions(20000)
	o.DurationS, o.Record, o.RecordEvery = 2.5, dir, time.Second
	o.Turn = &heading.SteadyTurn{RateDegPerS: 30}
	o.Geolocation = &sdr.GeoPoint{Type: "Point", Coordinates: []float64{6.25, 45.5}}
	res, err := runWith(t, context.Background(), o, newPacedSource(20000, -1, nil), nil)
	if err != nil {
		t.Fatal(err)
	}
	if res.Kept || len(res.Rotated) != 3 {
		t.Fatalf("kept %v, rotated %v: want 3 pairs in %s and the analysis copy temporary", res.Kept, res.Rotated, dir)
	}
	if !strings.HasPrefix(res.HeadingLog, res.Rotated[0]) {
		t.Errorf("heading log %q, want it beside the first pair %s", res.HeadingLog, res.Rotated[0])
	}
	sha := testtool.Need(t, "sha512sum")
	var joined []byte
	var prev time.Time
	for i, base := range res.Rotated {
		data, err := os.ReadFile(base + ".sigmf-data")
		if err != nil {
			t.Fatal(err)
		}
		joined = append(joined, data...)
		mb, err := os.ReadFile(base + ".sigmf-meta")
		if err != nil {
			t.Fatal(err)
		}
		var meta struct {
			Global   map[string]json.RawMessage   `json:"global"`
			Captures []map[string]json.RawMessage `json:"captures"`
		}
		if err := json.Unmarshal(mb, &meta); err != nil {
			t.Fatal(err)
		}
		var sum string
		var geo struct {
			Type        string    `json:"type"`
			Coordinates []float64 `json:"coordinates"`
		}
		json.Unmarshal(meta.Global["core:sha512"], &sum)
		json.Unmarshal(meta.Global["core:geolocation"], &geo)
		out, err := exec.Command(sha, base+".sigmf-data").Output()
		if err != nil {
			t.Fatal(err)
		}
		if got, _, _ := strings.Cut(string(out), " "); got != sum {
			t.Errorf("pair %d: core:sha512 %q, sha512sum %q", i, sum, got)
		}
		if geo.Type != "Point" || len(geo.Coordinates) != 2 || geo.Coordinates[0] != 6.25 || geo.Coordinates[1] != 45.5 {
			t.Errorf("pair %d: core:geolocation %s", i, meta.Global["core:geolocation"])
		}
		var dts string
		json.Unmarshal(meta.Captures[0]["core:datetime"], &dts)
		dt, err := time.Parse(time.RFC3339Nano, dts)
		if err != nil {
			t.Fatal(err)
		}
		if i > 0 && dt.Sub(prev).Abs()-time.Second > time.Millisecond {
			t.Errorf("pair %d starts %v after the one before, want 1 s", i, dt.Sub(prev))
		}
		prev = dt
	}
	if n := res.Info.Samples; !bytes.Equal(joined, pacedCodes(n)) || n != 50000 {
		t.Errorf("the pairs hold %d bytes; want the %d samples captured (2.5 s) byte for byte", len(joined), n)
	}
	if !strings.Contains(res.kept(), "3 SigMF pair(s) in "+filepath.Clean(dir)) {
		t.Errorf("the capture says %q", res.kept())
	}
}
