package archtest

import (
	"fmt"
	"go/build"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"
)

const module = "nullseek"

// Layers, lowest first (docs/ARCHITECTURE.md, "What may import what").
const (
	foundation = 1 // no nullseek imports outside this layer's own helpers
	domain     = 2 // one concern each: IQ I/O, headings, the Earth, bearings, identification, station files
	stages     = 3 // build on domain packages: receiver, live capture, storage, plots, simulation
	pipelines  = 4 // whole jobs over files: survey, locate
	apps       = 5 // jobs built from pipelines: the demo, the unattended station
	command    = 6 // cmd/nullseek
)

// place is a package's position: its layer and, inside the ident family,
// its order (0 for every package outside the family).
type place struct {
	layer int
	order int
}

// layers is the one table of where each package stands.
var layers = map[string]place{
	"internal/angle":      {foundation, 0},
	"internal/atomicfile": {foundation, 0},
	"internal/geodesic":   {foundation, 0},
	"internal/palette":    {foundation, 0},
	"internal/progress":   {foundation, 0},
	"internal/rtlsdr":     {foundation, 0},
	"internal/testtool":   {foundation, 0},
	"internal/units":      {foundation, 0},
	"internal/archtest":   {foundation, 0},
	"internal/cpuprofile": {domain, 0}, // stages its file with internal/atomicfile
	"internal/warnlog":    {foundation, 0},
	"internal/nmea":       {foundation, 0},
	"dsp":                 {foundation, 0},

	"sdr":     {domain, 0},
	"heading": {domain, 0},
	"geo":     {domain, 0},
	"bearing": {domain, 0},
	// The ident family, in its own order.
	"ident/internal/stats":     {domain, 1},
	"ident/internal/identtest": {domain, 1},
	"ident/morse":              {domain, 2},
	"ident/idmatch":            {domain, 3},
	"ident/fingerprint":        {domain, 4},
	"ident/internal/obstest":   {domain, 5},
	"ident/schedule":           {domain, 5},
	"ident":                    {domain, 5},

	"receiver":          {stages, 0},
	"station":           {stages, 0},
	"position":          {pipelines, 0}, // reads the station file's position source
	"capture":           {stages, 0},
	"store":             {stages, 0},
	"mapplot":           {stages, 0},
	"polarplot":         {stages, 0},
	"report":            {stages, 0},
	"report/reporttest": {stages, 0},
	"sim":               {stages, 0},

	"survey": {pipelines, 0},
	"locate": {pipelines, 0},

	"report/session": {apps, 1},
	"logbook":        {apps, 1}, // the one-shot commands' rows of the store
	"demo":           {apps, 2},
	"watch":          {apps, 2}, // imports logbook

	"cmd/nullseek": {command, 0},
}

// testOnly are packages that only tests may import.
var testOnly = map[string]bool{
	"internal/testtool":        true,
	"ident/internal/identtest": true,
	"ident/internal/obstest":   true,
	"report/reporttest":        true,
}

// family names the ordered groups: the ident family, and the apps layer
// (the report's assembly before the demo that writes a report).
func family(pkg string) string {
	if pkg == "ident" || strings.HasPrefix(pkg, "ident/") {
		return "ident"
	}
	if layers[pkg].layer == apps {
		return "apps"
	}
	return ""
}

// pkgImports is what one package imports from the module, by kind.
type pkgImports struct {
	prod  []string // non-test files
	tests []string // _test.go files, in-package and external
}

// check returns one line per import that breaks the layering rule; pkgs
// maps a package (module-relative path) to its module-internal imports.
func check(pkgs map[string]pkgImports) []string {
	var bad []string
	names := make([]string, 0, len(pkgs))
	for p := range pkgs {
		names = append(names, p)
	}
	sort.Strings(names)
	for _, p := range names {
		from, ok := layers[p]
		if !ok {
			bad = append(bad, fmt.Sprintf("%s: not in the layer table (place it in internal/archtest and docs/ARCHITECTURE.md)", p))
			continue
		}
		for _, q := range pkgs[p].prod {
			to, ok := layers[q]
			switch {
			case q == p:
			case !ok:
				bad = append(bad, fmt.Sprintf("%s imports %s, which is not in the layer table", p, q))
			case testOnly[q] && !testOnly[p]: // a test helper may build on another
				bad = append(bad, fmt.Sprintf("%s imports %s, which only tests may import", p, q))
			case to.layer < from.layer:
			case to.layer == from.layer && family(p) != "" && family(p) == family(q) && to.order < from.order:
			default:
				bad = append(bad, fmt.Sprintf("%s (layer %d) imports %s (layer %d): only lower layers may be imported", p, from.layer, q, to.layer))
			}
		}
		for _, q := range pkgs[p].tests {
			to, ok := layers[q]
			switch {
			case q == p:
			case !ok:
				bad = append(bad, fmt.Sprintf("%s's tests import %s, which is not in the layer table", p, q))
			case to.layer > from.layer:
				bad = append(bad, fmt.Sprintf("%s's tests (layer %d) import %s (layer %d): tests may import their own layer or lower", p, from.layer, q, to.layer))
			}
		}
	}
	return bad
}

// moduleRoot walks up from the test's directory to the go.mod.
func moduleRoot(t *testing.T) string {
	dir, err := os.Getwd()
	if err != nil {
		t.Fatal(err)
	}
	for {
		if _, err := os.Stat(filepath.Join(dir, "go.mod")); err == nil {
			return dir
		}
		parent := filepath.Dir(dir)
		if parent == dir {
			t.Fatal("no go.mod above the test directory")
		}
		dir = parent
	}
}

// readModule reads every package's module-internal imports under the build
// tags given, as go/build sees them (the go command's own file selection).
func readModule(t *testing.T, root string, tags []string) map[string]pkgImports {
	ctx := build.Default
	ctx.BuildTags = tags
	ctx.CgoEnabled = true
	out := map[string]pkgImports{}
	err := filepath.WalkDir(root, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if !d.IsDir() {
			return nil
		}
		name := d.Name()
		if path != root && (name == "testdata" || name == "vendor" || strings.HasPrefix(name, ".") || strings.HasPrefix(name, "_")) {
			return filepath.SkipDir
		}
		pkg, err := ctx.ImportDir(path, 0)
		if err != nil {
			if _, none := err.(*build.NoGoError); none {
				return nil
			}
			return fmt.Errorf("%s: %w", path, err)
		}
		rel, err := filepath.Rel(root, path)
		if err != nil {
			return err
		}
		own := func(list []string) []string {
			var r []string
			for _, imp := range list {
				if strings.HasPrefix(imp, module+"/") {
					r = append(r, strings.TrimPrefix(imp, module+"/"))
				}
			}
			return r
		}
		out[filepath.ToSlash(rel)] = pkgImports{
			prod:  own(pkg.Imports),
			tests: append(own(pkg.TestImports), own(pkg.XTestImports)...),
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return out
}

// TestLayers checks the module's real imports against the layer table.
func TestLayers(t *testing.T) {
	root := moduleRoot(t)
	for _, tags := range [][]string{nil, {"rtlsdr"}} {
		pkgs := readModule(t, root, tags)
		if len(pkgs) < len(layers)/2 {
			t.Fatalf("tags %v: read only %d packages from %s", tags, len(pkgs), root)
		}
		for _, line := range check(pkgs) {
			t.Errorf("tags %v: %s", tags, line)
		}
		// Every entry of the table names a package that exists, so the
		// table (and the document it mirrors) cannot go stale.
		for p := range layers {
			if _, ok := pkgs[p]; !ok {
				t.Errorf("tags %v: layer table names %s, which has no Go files", tags, p)
			}
		}
	}
}

// TestCheckRefuses: the checker reports each kind of breach (so TestLayers
// can fail), and accepts the allowed cases.
func TestCheckRefuses(t *testing.T) {
	cases := []struct {
		name string
		pkgs map[string]pkgImports
		bad  int
	}{
		{"upward: dsp imports sdr", map[string]pkgImports{"dsp": {prod: []string{"sdr"}}}, 1},
		{"sideways: geo imports bearing", map[string]pkgImports{"geo": {prod: []string{"bearing"}}}, 1},
		{"sideways in stages: receiver imports sim", map[string]pkgImports{"receiver": {prod: []string{"sim"}}}, 1},
		{"ident family backwards: morse imports idmatch", map[string]pkgImports{"ident/morse": {prod: []string{"ident/idmatch"}}}, 1},
		{"test-only package in production", map[string]pkgImports{"geo": {prod: []string{"internal/testtool"}}}, 1},
		{"test imports upward", map[string]pkgImports{"geo": {tests: []string{"locate"}}}, 1},
		{"unknown package", map[string]pkgImports{"newpkg": {}}, 1},
		{"downward is fine", map[string]pkgImports{"survey": {prod: []string{"receiver", "ident", "dsp"}}}, 0},
		{"ident family forwards is fine", map[string]pkgImports{"ident/schedule": {prod: []string{"ident/fingerprint", "ident/internal/stats"}}}, 0},
		{"test of the same layer is fine", map[string]pkgImports{"survey": {tests: []string{"locate", "internal/testtool"}}}, 0},
	}
	for _, c := range cases {
		if got := check(c.pkgs); len(got) != c.bad {
			t.Errorf("%s: %d complaints %q, want %d", c.name, len(got), got, c.bad)
		}
	}
}
