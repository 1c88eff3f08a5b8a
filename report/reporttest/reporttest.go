// Package reporttest loads a report page in headless Chromium for tests:
// what the browser made of it (images decoded, table texts) and a
// screenshot kept for a person to look at.
package reporttest

import (
	"encoding/json"
	"html"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
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
    bearings: [...document.querySelectorAll("tr.bearing")].map(r => [...r.cells].map(c => c.textContent.trim())),
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

// Probe is what Chromium made of a report page, as the probe script
// reports it: each image's natural width, height and whether it loaded,
// the number of scripts in the page itself, and the text of the cells
// that name stations, transmitters and slots, each fix and bearing row's
// cells and
// the figure captions.
type Probe struct {
	Images          [][3]any   `json:"images"`
	Scripts         int        `json:"scripts"`
	Stations        []string   `json:"stations"`
	BearingStations []string   `json:"bearingStations"`
	Fixes           [][]string `json:"fixes"`
	Bearings        [][]string `json:"bearings"`
	Transmitters    []string   `json:"transmitters"`
	Slots           []string   `json:"slots"`
	Captions        []string   `json:"captions"`
}

var probeRe = regexp.MustCompile(`(?s)<pre id="probe">(.*?)</pre>`)

// Load loads a copy of the report page at path, with the probe script
// added, in headless Chromium (testtool.Chromium) and returns what it
// found.
func Load(t *testing.T, path string) Probe {
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

// Screenshot takes a screenshot of the page at path, 1200 px wide and
// height px tall, into testtool.ArtifactDir as name, and returns its path
// (logged).
func Screenshot(t *testing.T, path, name string, height int) string {
	t.Helper()
	shot := filepath.Join(testtool.ArtifactDir(t), name)
	testtool.Chromium(t, path, "--screenshot="+shot, "--window-size=1200,"+strconv.Itoa(height))
	if st, err := os.Stat(shot); err != nil || st.Size() == 0 {
		t.Fatalf("no screenshot: %v", err)
	}
	t.Logf("screenshot: %s", shot)
	return shot
}
