package sdr

import (
	"encoding/json"
	"os"
	osexec "os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"nullseek/internal/testtool"
)

// cu8Exact returns n samples whose components are exact cu8 codes (so a
// write and read give them back unchanged).
func cu8Exact(n int) []complex64 {
	out := make([]complex64, n)
	for k := range out {
		out[k] = complex(cu8Table[byte(k)], cu8Table[byte(k*7+k>>8)])
	}
	return out
}

// pyMeta reads a .sigmf-meta with Python's json module (outside our
// parser) and returns the global, the captures and the annotations.
func pyMeta(t *testing.T, path string) (global map[string]any, captures, annotations []map[string]any) {
	t.Helper()
	py := testtool.Need(t, testtool.DebianPython)
	out, err := osexec.Command(py, "-c", `import json,sys; m=json.load(open(sys.argv[1])); print(json.dumps([m["global"], m["captures"], m["annotations"]]))`, path).CombinedOutput()
	if err != nil {
		t.Fatalf("python json: %v\n%s", err, out)
	}
	var v [3]json.RawMessage
	if err := json.Unmarshal(out, &v); err != nil {
		t.Fatal(err)
	}
	json.Unmarshal(v[0], &global)
	json.Unmarshal(v[1], &captures)
	json.Unmarshal(v[2], &annotations)
	return
}

// Rolling over by size: 10000-byte cu8 files hold 5000 samples each; 23000
// samples written in uneven pieces make 4 full pairs and one of 6000
// bytes, named after the UTC time of their first sample, each with
// core:sha512 equal to sha512sum's of its data and core:geolocation as
// given (a GeoJSON Point, [longitude, latitude, altitude]: RFC 7946
// §3.1.2, SigMF v1.2.5 core:geolocation). Read back in order they give
// the samples written.
func TestRotatingSigMFBySize(t *testing.T) {
	dir := t.TempDir()
	start := time.Date(2026, 5, 1, 10, 0, 0, 0, time.UTC)
	rate := 250000.0
	pos := &GeoPoint{Type: "Point", Coordinates: []float64{-1.5, 52.25, 80}}
	w, err := NewRotatingSigMF(Info{SampleRate: rate, CenterHz: 145.5e6, Start: start},
		RotateOptions{Dir: dir, MaxBytes: 10000, Position: func() *GeoPoint { return pos }})
	if err != nil {
		t.Fatal(err)
	}
	in := cu8Exact(23000)
	for rest := in; len(rest) > 0; {
		n := min(len(rest), 3333)
		if err := w.Write(rest[:n]); err != nil {
			t.Fatal(err)
		}
		rest = rest[n:]
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	files := w.Files()
	wantNames := []string{"20260501T100000.000Z", "20260501T100000.020Z", "20260501T100000.040Z", "20260501T100000.060Z", "20260501T100000.080Z"}
	if len(files) != len(wantNames) {
		t.Fatalf("files %v", files)
	}
	var got []complex64
	for i, base := range files {
		if filepath.Base(base) != "nullseek-"+wantNames[i] {
			t.Errorf("file %d is %s, want nullseek-%s", i, filepath.Base(base), wantNames[i])
		}
		st, err := os.Stat(base + ".sigmf-data")
		if err != nil {
			t.Fatal(err)
		}
		if want := map[bool]int64{true: 6000, false: 10000}[i == 4]; st.Size() != want {
			t.Errorf("%s: %d bytes, want %d", base, st.Size(), want)
		}
		g, caps, _ := pyMeta(t, base+".sigmf-meta")
		if g["core:sha512"] != testtool.SHA512Sum(t, base+".sigmf-data") {
			t.Errorf("%s: core:sha512 %v differs from sha512sum", base, g["core:sha512"])
		}
		geo, _ := g["core:geolocation"].(map[string]any)
		if c, _ := geo["coordinates"].([]any); geo["type"] != "Point" || len(c) != 3 || c[0] != -1.5 || c[1] != 52.25 || c[2] != 80.0 {
			t.Errorf("%s: core:geolocation %v", base, g["core:geolocation"])
		}
		if len(caps) != 1 || caps[0]["core:datetime"] != start.Add(time.Duration(i)*20*time.Millisecond).Format("2006-01-02T15:04:05.000000000Z") {
			t.Errorf("%s: captures %v", base, caps)
		}
		s, err := Open(base+".sigmf-meta", RawParams{})
		if err != nil {
			t.Fatal(err)
		}
		got = append(got, readAll(t, s, 4096)...)
		s.Close()
	}
	if len(got) != len(in) {
		t.Fatalf("read back %d samples, wrote %d", len(got), len(in))
	}
	for k := range in {
		if got[k] != in[k] {
			t.Fatalf("sample %d: %v, wrote %v", k, got[k], in[k])
		}
	}
}

// Rolling over by time with a gap: at 240 kS/s every 100 ms of receiver
// time is 24000 samples. A 6000-sample gap after sample 30000 takes 6000
// samples of the second file's time, which gets a second capture segment
// (core:sample_start 6000, core:datetime after the gap) and a "gap"
// annotation; the third file starts at receiver sample 48000. Gaps found
// ahead of the samples written wait until writing reaches them. Without a
// position there is no core:geolocation.
func TestRotatingSigMFByTimeWithGap(t *testing.T) {
	dir := t.TempDir()
	start := time.Date(2026, 5, 1, 23, 59, 59, 950_000_000, time.UTC)
	const rate = 240000.0
	w, err := NewRotatingSigMF(Info{SampleRate: rate, Start: start}, RotateOptions{Dir: dir, Every: 100 * time.Millisecond, Format: "ci16_le"})
	if err != nil {
		t.Fatal(err)
	}
	in := cu8Exact(60000)
	if err := w.Write(in[:20000]); err != nil {
		t.Fatal(err)
	}
	if err := w.AddGap(Gap{Kind: GapReconnect, Index: 30000, Missing: 6000, Lost: 25 * time.Millisecond, Cause: "test"}); err != nil {
		t.Fatal(err)
	}
	if err := w.Write(in[20000:]); err != nil {
		t.Fatal(err)
	}
	if err := w.AddGap(Gap{Index: 100}); err == nil {
		t.Error("a gap before the samples written was accepted")
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	files := w.Files()
	if len(files) != 3 {
		t.Fatalf("files %v", files)
	}
	wantSamples := []int64{24000, 18000, 18000}
	wantStart := []time.Time{start, start.Add(100 * time.Millisecond), start.Add(200 * time.Millisecond)} // receiver sample 48000
	for i, base := range files {
		if !strings.HasSuffix(base, "nullseek-"+wantStart[i].Format("20060102T150405.000Z")) {
			t.Errorf("file %d is %s", i, base)
		}
		st, _ := os.Stat(base + ".sigmf-data")
		if st.Size() != 4*wantSamples[i] {
			t.Errorf("%s: %d bytes, want %d samples of ci16", base, st.Size(), wantSamples[i])
		}
		g, caps, anns := pyMeta(t, base+".sigmf-meta")
		if _, ok := g["core:geolocation"]; ok {
			t.Errorf("%s: geolocation without a position", base)
		}
		if caps[0]["core:datetime"] != wantStart[i].Format("2006-01-02T15:04:05.000000000Z") {
			t.Errorf("%s: datetime %v, want %v", base, caps[0]["core:datetime"], wantStart[i])
		}
		if i != 1 {
			if len(caps) != 1 || len(anns) != 0 {
				t.Errorf("%s: captures %v annotations %v", base, caps, anns)
			}
			continue
		}
		if len(caps) != 2 || caps[1]["core:sample_start"] != 6000.0 || caps[1]["core:datetime"] != start.Add(150*time.Millisecond).Format("2006-01-02T15:04:05.000000000Z") {
			t.Errorf("%s: captures %v, want a second at 6000 dated 150 ms in", base, caps)
		}
		if len(anns) != 1 || anns[0]["core:sample_start"] != 6000.0 || anns[0]["core:label"] != "gap" || !strings.Contains(anns[0]["core:comment"].(string), "6000 samples (25ms) missing before this sample (reconnect): test") {
			t.Errorf("%s: annotations %v", base, anns)
		}
	}
}

// An interrupted run (the writer never closed, as a killed process leaves
// it): the completed pair is whole, the current one holds at least every
// sample up to its last flush and reads back with the metadata of that
// flush (no core:sha512).
func TestRotatingSigMFInterrupted(t *testing.T) {
	dir := t.TempDir()
	const rate = 250000.0
	w, err := NewRotatingSigMF(Info{SampleRate: rate, Start: time.Date(2026, 5, 1, 0, 0, 0, 0, time.UTC)},
		RotateOptions{Dir: dir, MaxBytes: 200000, FlushEvery: 100 * time.Millisecond})
	if err != nil {
		t.Fatal(err)
	}
	in := cu8Exact(170000) // 100000 in the first pair, 70000 in the second: flushed at 25000, 50000
	if err := w.Write(in); err != nil {
		t.Fatal(err)
	}
	if len(w.Files()) != 1 || w.Current() == "" {
		t.Fatalf("files %v current %q", w.Files(), w.Current())
	}
	s, err := Open(w.Files()[0]+".sigmf-meta", RawParams{})
	if err != nil {
		t.Fatal(err)
	}
	if got := readAll(t, s, 4096); len(got) != 100000 {
		t.Errorf("completed pair: %d samples", len(got))
	}
	s.Close()
	cur := w.Current()
	g, _, _ := pyMeta(t, cur+".sigmf-meta")
	if _, ok := g["core:sha512"]; ok {
		t.Error("the pair being written has core:sha512")
	}
	s, err = Open(cur+".sigmf-meta", RawParams{})
	if err != nil {
		t.Fatal(err)
	}
	got := readAll(t, s, 4096)
	s.Close()
	if len(got) < 50000 || len(got) > 70000 {
		t.Fatalf("current pair: %d samples on disk, want at least the 50000 flushed", len(got))
	}
	for k := range got {
		if got[k] != in[100000+k] {
			t.Fatalf("current pair sample %d differs", k)
		}
	}
	t.Logf("current pair: %d of 70000 samples on disk before Close", len(got))
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
}

// Bad options are one line each.
func TestRotatingSigMFOptions(t *testing.T) {
	dir := t.TempDir()
	info := Info{SampleRate: 250000}
	for _, tc := range []struct {
		o    RotateOptions
		want string
	}{
		{RotateOptions{Dir: filepath.Join(dir, "none")}, "is not a directory"},
		{RotateOptions{Dir: dir, MaxBytes: 1}, "max bytes 1 is less than one cu8 sample (2 bytes)"},
		{RotateOptions{Dir: dir, Every: time.Microsecond}, "shorter than one sample"},
		{RotateOptions{Dir: dir, Format: "cx9"}, "rotating recording"},
	} {
		if _, err := NewRotatingSigMF(info, tc.o); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%+v: %v, want %q", tc.o, err, tc.want)
		}
	}
}
