package report

import (
	"encoding/json"
	"html"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"

	"nullseek/internal/testtool"
)

// probeScript goes into the test's copy of a page only (the page itself
// has no script): once the page has loaded it writes what Chromium made of
// the page as JSON into <pre id="probe">, which --dump-dom then prints.
const probeScript = `<script>
window.addEventListener("load", () => {
  const texts = sel => [...document.querySelectorAll(sel)].map(e => e.textContent.trim());
  const probe = {
    images: [...document.images].map(i => [i.naturalWidth, i.naturalHeight, i.complete]),
    scripts: document.scripts.length - 1,
    stations: texts("tr.station td.st"),
    bearingStations: texts("tr.bearing td.st"),
    fixes: [...document.querySelectorAll("tr.fix")].map(r => [...r.cells].map(c => c.textContent.trim())),
    transmitters: texts("tr.tx td.id"),
    slots: texts("tr.slot td.id"),
    captions: texts("figcaption"),
  };
  const pre = document.createElement("pre");
  pre.id = "probe";
  pre.textContent = JSON.stringify(probe);
  document.body.appendChild(pre);
});
</script>`

// Probe is what the probe script reports.
type Probe struct {
	Images          [][3]any   `json:"images"`
	Scripts         int        `json:"scripts"`
	Stations        []string   `json:"stations"`
	BearingStations []string   `json:"bearingStations"`
	Fixes           [][]string `json:"fixes"`
	Transmitters    []string   `json:"transmitters"`
	Slots           []string   `json:"slots"`
	Captions        []string   `json:"captions"`
}

var probeRe = regexp.MustCompile(`(?s)<pre id="probe">(.*?)</pre>`)

// ProbeInChromium loads a copy of the page at path, with the probe script,
// in headless Chromium and returns what it found.
func probeInChromium(t *testing.T, path string) Probe {
	t.Helper()
	page, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	cp := filepath.Join(t.TempDir(), "probe.html")
	withProbe := strings.Replace(string(page), "</body>", probeScript+"</body>", 1)
	if err := os.WriteFile(cp, []byte(withProbe), 0o644); err != nil {
		t.Fatal(err)
	}
	dom := testtool.Chromium(t, cp, "--dump-dom", "--virtual-time-budget=10000")
	m := probeRe.FindStringSubmatch(dom)
	if m == nil {
		t.Fatalf("no probe in Chromium's DOM (the load event never came?):\n%.2000s", dom)
	}
	var p Probe
	if err := json.Unmarshal([]byte(html.UnescapeString(m[1])), &p); err != nil {
		t.Fatalf("probe: %v: %s", err, m[1])
	}
	return p
}

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
	p := probeInChromium(t, path)
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

	shot := filepath.Join(testtool.ArtifactDir(t), "report-scene.png")
	testtool.Chromium(t, path, "--screenshot="+shot, "--window-size=1200,2000")
	if st, err := os.Stat(shot); err != nil || st.Size() == 0 {
		t.Fatalf("no screenshot: %v", err)
	}
	t.Logf("screenshot: %s", shot)
}
