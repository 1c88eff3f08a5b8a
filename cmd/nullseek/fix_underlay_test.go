package main

import (
	"bytes"
	"image"
	"image/png"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// fix --underlay: drawn when it covers the map; bad pictures and
// georeferences are one error line, exit 1, and no file at all.
func TestFixCommandUnderlay(t *testing.T) {
	dir := t.TempDir()
	in, _ := synthCSV(t, dir) // near 45.1N 6.2E
	pic := filepath.Join(dir, "sheet.png")
	var buf bytes.Buffer
	if err := png.Encode(&buf, image.NewGray(image.Rect(0, 0, 50, 40))); err != nil {
		t.Fatal(err)
	}
	os.WriteFile(pic, buf.Bytes(), 0o644)
	text := filepath.Join(dir, "notes.jpg")
	os.WriteFile(text, []byte("a shopping list\n"), 0o644)
	m := filepath.Join(dir, "m.png")
	if out, err := runFixCmd(t, "fix", in, "--map", m, "--underlay", pic, "--underlay-ref", "sw=45.0,6.1 ne=45.2,6.3"); err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	if st, err := os.Stat(m); err != nil || st.Size() < 1000 {
		t.Fatalf("map with underlay: %v", err)
	}
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"--underlay", filepath.Join(dir, "none.png"), "--underlay-ref", "sw=45.0,6.1 ne=45.2,6.3"}, "no such file"},
		{[]string{"--underlay", text, "--underlay-ref", "sw=45.0,6.1 ne=45.2,6.3"}, "not a PNG or JPEG"},
		{[]string{"--underlay", pic, "--underlay-ref", "sw=45.2,6.1 ne=45.0,6.3"}, "corners swapped"},
		{[]string{"--underlay", pic, "--underlay-ref", "sw=48.0,2.0 ne=48.2,2.3"}, "covers none of the map"},
		{[]string{"--underlay", pic}, "no georeference"},
	} {
		out := t.TempDir()
		args := append([]string{"fix", in, "--map", filepath.Join(out, "m.png"), "--geojson", filepath.Join(out, "f.geojson")}, c.args...)
		_, err := runFixCmd(t, args...)
		if err == nil || !strings.Contains(err.Error(), c.want) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%v: error %v, want one line with %q", c.args, err, c.want)
		}
		if ents, _ := os.ReadDir(out); len(ents) != 0 {
			t.Errorf("%v: files written: %v", c.args, ents)
		}
	}
}
