package watch

import (
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"nullseek/internal/testtool"
)

// checkRecording is run by python3 (numpy, and the standard library's
// json and hashlib: outside readers of the files): it reads the rotated
// SigMF pairs in time order, checks each data file against its metadata
// (core:datatype cu8, core:sample_rate, core:sha512 = SHA-512 of the data,
// core:geolocation a GeoJSON Point — SigMF v1.2.5 global object, RFC 7946
// §3.1.2), and compares their samples, joined, with the start of the
// recording that was served. It prints one JSON object of what it found.
const checkRecording = `
import glob, hashlib, json, sys
import numpy as np
src, rec_dir = sys.argv[1], sys.argv[2]
served = np.fromfile(src, dtype=np.uint8)
pairs = sorted(glob.glob(rec_dir + "/*.sigmf-meta"))
out = {"pairs": [], "bytes": 0}
joined = []
for m in pairs:
    meta = json.load(open(m))
    g = meta["global"]
    data = open(m[:-len("meta")] + "data", "rb").read()
    a = np.frombuffer(data, dtype=np.uint8)
    joined.append(a)
    out["pairs"].append({"datatype": g["core:datatype"], "rate": g["core:sample_rate"],
        "sha_ok": g.get("core:sha512") == hashlib.sha512(data).hexdigest(),
        "geo": g.get("core:geolocation"), "datetime": meta["captures"][0]["core:datetime"],
        "freq": meta["captures"][0].get("core:frequency"), "samples": len(a) // 2})
    out["bytes"] += len(data)
j = np.concatenate(joined)
out["equal_prefix"] = bool(len(j) <= len(served) and np.array_equal(j, served[:len(j)]))
out["max_diff"] = int(np.max(np.abs(j.astype(int) - served[:len(j)].astype(int)))) if len(j) <= len(served) else -1
print(json.dumps(out))
`

// TestWatchRecord: a watch with RecordDir keeps the samples it received
// as SigMF pairs rolled over every 15 s: python3 with numpy reads them
// back and finds, joined in time order, exactly the bytes the rtl_tcp
// server sent (the start of the served cu8 file, sample for sample), each
// with its SHA-512 in core:sha512 and the station's position (6.0 E,
// 45.0 N, as the station file says) in core:geolocation, the pairs 15 s
// apart in core:datetime.
func TestWatchRecord(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	meta := makeRecording(t, dir)
	rot, _ := testtool.Rotctld(t)
	py := testtool.Python(t, "numpy")
	rec := filepath.Join(dir, "rec")
	if err := os.Mkdir(rec, 0o755); err != nil {
		t.Fatal(err)
	}
	sp := writeStation(t, dir, serve(t, meta), rot)
	sum, _, log, _ := watchRun(t, sp, Options{RecordDir: rec, RecordEvery: 15 * time.Second})
	t.Logf("log:\n%s", log)

	script := filepath.Join(dir, "check.py")
	if err := os.WriteFile(script, []byte(checkRecording), 0o644); err != nil {
		t.Fatal(err)
	}
	out, err := exec.Command(py, script, strings.TrimSuffix(meta, "meta")+"data", rec).CombinedOutput()
	if err != nil {
		t.Fatalf("python3: %v\n%s", err, out)
	}
	var got struct {
		Pairs []struct {
			Datatype string
			Rate     float64
			ShaOK    bool `json:"sha_ok"`
			Geo      struct {
				Type        string
				Coordinates []float64
			}
			Datetime string
			Freq     float64
			Samples  int64
		}
		Bytes       int64
		EqualPrefix bool `json:"equal_prefix"`
		MaxDiff     int  `json:"max_diff"`
	}
	if err := json.Unmarshal(out, &got); err != nil {
		t.Fatalf("python3 said %s: %v", out, err)
	}
	t.Logf("recorded %d bytes in %d pairs: %s", got.Bytes, len(got.Pairs), out)
	if len(got.Pairs) != 3 {
		t.Fatalf("%d pairs for a %v s watch rolled every 15 s, want 3", len(got.Pairs), recSeconds)
	}
	if got.Bytes != 2*sum.Samples || !got.EqualPrefix {
		t.Errorf("recorded %d bytes (the watch read %d samples); equal to what was served: %v (largest byte difference %d)",
			got.Bytes, sum.Samples, got.EqualPrefix, got.MaxDiff)
	}
	var first time.Time
	for i, p := range got.Pairs {
		dt, err := time.Parse(time.RFC3339Nano, p.Datetime)
		if err != nil {
			t.Fatal(err)
		}
		if i == 0 {
			first = dt
		}
		want := first.Add(time.Duration(i) * 15 * time.Second)
		if p.Datatype != "cu8" || p.Rate != 240000 || !p.ShaOK || p.Freq != recCentre || p.Geo.Type != "Point" ||
			len(p.Geo.Coordinates) != 2 || p.Geo.Coordinates[0] != 6.0 || p.Geo.Coordinates[1] != 45.0 || dt.Sub(want).Abs() > time.Millisecond {
			t.Errorf("pair %d: %+v (start %v, want %v)", i, p, dt, want)
		}
		if i < 2 && p.Samples != 15*240000 {
			t.Errorf("pair %d holds %d samples, want 15 s", i, p.Samples)
		}
	}
}
