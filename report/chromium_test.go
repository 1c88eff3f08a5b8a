package report

import (
	"os"
	"path/filepath"
	"slices"
	"testing"

	"nullseek/report/reporttest"
)

// The page as Chromium (an outside HTML engine) renders it: every picture
// decodes (natural size > 0, the PNGs at the size they were encoded), the
// stations, transmitters and fixes are in their tables as text - the
// hostile station name included, as text - and no script runs. A
// screenshot is kept in testtool.ArtifactDir as report-scene.png.
func TestPageInChromium(t *testing.T) {
	r := scene(t)
	path := filepath.Join(t.TempDir(), "session.html")
	fh, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := Write(fh, r); err != nil {
		t.Fatal(err)
	}
	if err := fh.Close(); err != nil {
		t.Fatal(err)
	}
	p := reporttest.Load(t, path)
	if p.Scripts != 0 {
		t.Errorf("%d script elements in the page", p.Scripts)
	}
	wantSizes := [][2]float64{{600, 400}, {300, 300}, {320, 240}}
	if len(p.Images) != len(wantSizes) {
		t.Fatalf("%d images in the DOM, want %d", len(p.Images), len(wantSizes))
	}
	for i, im := range p.Images {
		w, _ := im[0].(float64)
		h, _ := im[1].(float64)
		if w != wantSizes[i][0] || h != wantSizes[i][1] || im[2] != true {
			t.Errorf("image %d: natural size %v×%v (complete %v), want %v", i, w, h, im[2], wantSizes[i])
		}
	}
	wantStations := []string{"alpha", hostileStation, "gamma"}
	if !slices.Equal(p.Stations, wantStations) {
		t.Errorf("stations %q, want %q", p.Stations, wantStations)
	}
	if !slices.Equal(p.BearingStations, []string{"alpha", hostileStation, "gamma"}) {
		t.Errorf("bearing stations %q", p.BearingStations)
	}
	if !slices.Equal(p.Transmitters, []string{"TX/1", hostileIdent}) || !slices.Equal(p.Slots, []string{"TX/1", hostileIdent}) {
		t.Errorf("transmitters %q, slots %q", p.Transmitters, p.Slots)
	}
	if len(p.Fixes) != 1 {
		t.Fatalf("%d fix rows", len(p.Fixes))
	}
	// the fix's cells: ident, lat, lon, locator, cell, probability, semi-axes, axis, ...
	want := []string{"TX/1", "47.17654", "8.71235", "JN47qe12", "C7", "95", "842", "289", "143", "2", "2", "62", "C7 51, D7 17, C8 15"}
	if !slices.Equal(p.Fixes[0], want) {
		t.Errorf("fix row %q, want %q", p.Fixes[0], want)
	}
	if !slices.Contains(p.Captions, hostileStation+": "+hostileIdent) {
		t.Errorf("captions %q", p.Captions)
	}

	reporttest.Screenshot(t, path, "report-scene.png", 2600)
}
