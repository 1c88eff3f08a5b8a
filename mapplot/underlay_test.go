package mapplot

import (
	"bytes"
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/jpeg"
	"image/png"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"nullseek/internal/testtool"
)

// The scene of these tests is invented (a square of country near 52.2N
// 5.9E); the references are PROJ 9 (proj, cs2cs: Debian proj-bin), which
// the tests run.

// projRun feeds "x y" lines to a PROJ program and returns the first two
// numbers of each output line.
func projRun(t *testing.T, prog string, args []string, in [][2]float64) [][2]float64 {
	t.Helper()
	bin := testtool.Need(t, prog)
	var sb strings.Builder
	for _, p := range in {
		fmt.Fprintf(&sb, "%.10f %.10f\n", p[0], p[1])
	}
	cmd := exec.Command(bin, append(args, "-f", "%.6f")...)
	cmd.Stdin = strings.NewReader(sb.String())
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("%s: %v: %s", prog, err, out)
	}
	var res [][2]float64
	for _, ln := range strings.Split(strings.TrimSpace(string(out)), "\n") {
		f := strings.Fields(ln)
		if len(f) < 2 {
			t.Fatalf("%s: line %q", prog, ln)
		}
		a, err1 := strconv.ParseFloat(f[0], 64)
		b, err2 := strconv.ParseFloat(f[1], 64)
		if err1 != nil || err2 != nil {
			t.Fatalf("%s: line %q", prog, ln)
		}
		res = append(res, [2]float64{a, b})
	}
	if len(res) != len(in) {
		t.Fatalf("%s: %d lines for %d inputs", prog, len(res), len(in))
	}
	return res
}

// marker is a coloured square of the test picture.
type marker struct {
	col, row int // top-left pixel
	c        color.NRGBA
}

var markers = []marker{
	{40, 30, color.NRGBA{R: 255, A: 255}},
	{300, 60, color.NRGBA{G: 255, A: 255}},
	{120, 220, color.NRGBA{B: 255, A: 255}},
	{350, 260, color.NRGBA{R: 255, B: 255, A: 255}},
}

const markerSide = 4 // pixels

// markerPicture writes a white w×h PNG with the markers to dir.
func markerPicture(t *testing.T, dir, name string, w, h int) string {
	t.Helper()
	img := image.NewNRGBA(image.Rect(0, 0, w, h))
	for i := range img.Pix {
		img.Pix[i] = 255
	}
	for _, m := range markers {
		for j := 0; j < markerSide; j++ {
			for i := 0; i < markerSide; i++ {
				img.SetNRGBA(m.col+i, m.row+j, m.c)
			}
		}
	}
	var buf bytes.Buffer
	if err := png.Encode(&buf, img); err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(dir, name)
	if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// centroid is the weighted centre (raster pixel-centre coordinates) of
// the marker colour in the window around (wx, wy) ± r pixels: each pixel
// weighs its share of the marker colour in a blend with white.
func centroid(img *image.RGBA, c color.NRGBA, wx, wy, r float64) (x, y float64, ok bool) {
	var sw, sx, sy float64
	// the washed marker colour: washing mixes underlayWash of white in
	k := 1 - underlayWash
	want := [3]float64{k*float64(c.R) + underlayWash*255, k*float64(c.G) + underlayWash*255, k*float64(c.B) + underlayWash*255}
	for j := max(0, int(wy-r)); j < min(img.Rect.Dy(), int(wy+r)); j++ {
		for i := max(0, int(wx-r)); i < min(img.Rect.Dx(), int(wx+r)); i++ {
			o := img.PixOffset(i, j)
			if img.Pix[o+3] == 0 {
				continue
			}
			var share, n float64
			for ch := 0; ch < 3; ch++ {
				if d := 255 - want[ch]; d > 1 {
					share += (255 - float64(img.Pix[o+ch])) / d
					n++
				}
			}
			if share /= n; share > 0.02 {
				sw += share
				sx += share * float64(i)
				sy += share * float64(j)
			}
		}
	}
	if sw == 0 {
		return 0, 0, false
	}
	return sx / sw, sy / sw, true
}

// checkMarkers warps u onto a raster of pixM-metre pixels over the box
// (km in fr) and compares each marker's centre with where PROJ puts it.
func checkMarkers(t *testing.T, u *Underlay, fr frame, box [4]float64, pixM float64, want [][2]float64, tolM float64) {
	t.Helper()
	x0, y0, x1, y1 := box[0], box[1], box[2], box[3]
	w, h := int(math.Round((x1-x0)*1e3/pixM)), int(math.Round((y1-y0)*1e3/pixM))
	img, share := u.warp(fr, x0, y0, x1, y1, w, h, warpStep)
	if share <= 0 {
		t.Fatal("the picture covers nothing")
	}
	for k, m := range markers {
		// look within 400 m of where PROJ puts it (markers lie km apart)
		cx, cy, ok := centroid(img, m.c, (want[k][0]-x0*1e3)/pixM-0.5, (y1*1e3-want[k][1])/pixM-0.5, 400/pixM)
		if !ok {
			t.Errorf("marker %d not found in the warped picture", k)
			continue
		}
		// raster pixel centre → metres east/north in the frame
		e := (x0*1e3 + (cx+0.5)*pixM)
		n := (y1*1e3 - (cy+0.5)*pixM)
		d := math.Hypot(e-want[k][0], n-want[k][1])
		t.Logf("marker %d: warped to %.1f E %.1f N m, PROJ %.1f %.1f: %.2f m apart", k, e, n, want[k][0], want[k][1], d)
		if d > tolM {
			t.Errorf("marker %d is %.2f m from where PROJ puts it (tolerance %.1f m)", k, d, tolM)
		}
	}
}

// Corners: a lat/lon-linear picture. Each marker's centre is at a known
// latitude and longitude (linear in its pixel position between the
// corners); PROJ's ellipsoidal azimuthal equidistant projection about the
// map origin (proj +proj=aeqd +ellps=WGS84, which PROJ solves with
// GeographicLib's geodesics) says where it belongs on the map.
func TestWarpCornersAgainstPROJ(t *testing.T) {
	dir := t.TempDir()
	const w, h = 400, 300
	pic := markerPicture(t, dir, "sheet.png", w, h)
	const sLat, wLon, nLat, eLon = 52.19, 5.82, 52.26, 5.94
	u, err := UnderlaySpec{Path: pic, Ref: fmt.Sprintf("sw=%v,%v ne=%v,%v", sLat, wLon, nLat, eLon)}.Load()
	if err != nil {
		t.Fatal(err)
	}
	fr := frame{52.23, 5.87}
	var ll [][2]float64
	for _, m := range markers {
		c := float64(m.col) + markerSide/2.0 // the square's centre, in outer-corner pixel units
		r := float64(m.row) + markerSide/2.0
		ll = append(ll, [2]float64{wLon + c/w*(eLon-wLon), nLat - r/h*(nLat-sLat)})
	}
	want := projRun(t, "proj", []string{"+proj=aeqd", "+lat_0=52.23", "+lon_0=5.87", "+ellps=WGS84"}, ll)
	// 10 m map pixels; a picture pixel is about 20 m by 26 m
	checkMarkers(t, u, fr, [4]float64{-5, -5, 5, 5}, 10, want, 1)
}

// World file on UTM zone 31N with a rotated grid (B, D ≠ 0): PROJ's cs2cs
// takes each marker's UTM position straight to the map's projection.
func TestWarpUTMWorldFileAgainstCs2cs(t *testing.T) {
	dir := t.TempDir()
	const w, h = 400, 300
	pic := markerPicture(t, dir, "sheet.png", w, h)
	// 25 m pixels, turned 4° (the grid north of a sheet off its
	// meridian); the top-left pixel's centre near 52.25N 5.80E
	const px, rot = 25.0, 4 * math.Pi / 180
	A, D := px*math.Cos(rot), -px*math.Sin(rot)
	B, E := -px*math.Sin(rot), -px*math.Cos(rot)
	C, F := 691200.0, 5791500.0
	wld := fmt.Sprintf("%.10f\n%.10f\n%.10f\n%.10f\n%.4f\n%.4f\n", A, D, B, E, C, F)
	if err := os.WriteFile(filepath.Join(dir, "sheet.pgw"), []byte(wld), 0o644); err != nil {
		t.Fatal(err)
	}
	u, err := UnderlaySpec{Path: pic, Ref: "crs=utm:31N"}.Load()
	if err != nil {
		t.Fatal(err)
	}
	var en [][2]float64
	for _, m := range markers {
		// world file rows and columns count from the top-left pixel's centre
		c := float64(m.col) + markerSide/2.0 - 0.5
		r := float64(m.row) + markerSide/2.0 - 0.5
		en = append(en, [2]float64{A*c + B*r + C, D*c + E*r + F})
	}
	want := projRun(t, "cs2cs", []string{"+proj=utm", "+zone=31", "+datum=WGS84", "+to", "+proj=aeqd", "+lat_0=52.22", "+lon_0=5.87", "+datum=WGS84"}, en)
	checkMarkers(t, u, frame{52.22, 5.87}, [4]float64{-8, -8, 8, 8}, 10, want, 1)
}

// UTM (Krüger n⁴ series) against PROJ 9's +proj=utm (Poder/Engsager
// series, accurate to mm): near and far from the central meridian, both
// hemispheres.
func TestUTMAgainstCs2cs(t *testing.T) {
	pts := []struct {
		lat, lon float64
		zone     int
		south    bool
	}{
		{52.22, 5.87, 31, false}, {52.22, 8.9, 31, false}, {-33.9, 18.4, 34, true}, {0.5, -77.0, 18, false}, {69.6, 18.9, 34, false}, {-45, -70.5, 18, true},
	}
	for _, p := range pts {
		args := []string{"+proj=longlat", "+datum=WGS84", "+to", "+proj=utm", fmt.Sprintf("+zone=%d", p.zone), "+datum=WGS84"}
		if p.south {
			args = append(args, "+south")
		}
		want := projRun(t, "cs2cs", args, [][2]float64{{p.lon, p.lat}})[0]
		e, n := UTM(p.lat, p.lon, p.zone, p.south)
		if d := math.Hypot(e-want[0], n-want[1]); d > 0.001 {
			t.Errorf("UTM(%v, %v, zone %d) = %.4f %.4f, cs2cs %.4f %.4f: %.4f m apart", p.lat, p.lon, p.zone, e, n, want[0], want[1], d)
		}
	}
}

// The node mesh (exact every warpStep pixels, linear between) gives the
// colours that exact projection of every pixel gives, to a level or two.
func TestWarpMeshAgreesWithExact(t *testing.T) {
	dir := t.TempDir()
	pic := markerPicture(t, dir, "sheet.png", 400, 300)
	u, err := UnderlaySpec{Path: pic, Ref: "sw=52.0,5.6 ne=52.4,6.2"}.Load()
	if err != nil {
		t.Fatal(err)
	}
	fr := frame{52.2, 5.9}
	mesh, _ := u.warp(fr, -20, -20, 20, 20, 600, 600, warpStep)
	exact, _ := u.warp(fr, -20, -20, 20, 20, 600, 600, 1)
	worst := 0
	for i := range mesh.Pix {
		d := int(mesh.Pix[i]) - int(exact.Pix[i])
		worst = max(worst, d, -d)
	}
	if worst > 2 {
		t.Errorf("mesh and exact warps differ by up to %d levels", worst)
	}
}

// Bad input: one error naming the file and what is wrong.
func TestUnderlayBadInput(t *testing.T) {
	dir := t.TempDir()
	pic := markerPicture(t, dir, "sheet.png", 40, 30)
	text := filepath.Join(dir, "notes.png")
	if err := os.WriteFile(text, []byte("not a picture at all\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	cut := filepath.Join(dir, "cut.png")
	b, _ := os.ReadFile(pic)
	if err := os.WriteFile(cut, b[:60], 0o644); err != nil {
		t.Fatal(err)
	}
	utmWorld := filepath.Join(dir, "utm.wld")
	if err := os.WriteFile(utmWorld, []byte("25\n0\n0\n-25\n691200\n5791500\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	short := filepath.Join(dir, "short.wld")
	if err := os.WriteFile(short, []byte("25\n0\n0\n-25\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		spec UnderlaySpec
		want string
	}{
		{UnderlaySpec{Path: filepath.Join(dir, "nope.png"), Ref: "sw=52,5 ne=53,6"}, "no such file"},
		{UnderlaySpec{Path: text, Ref: "sw=52,5 ne=53,6"}, "not a PNG or JPEG"},
		{UnderlaySpec{Path: cut, Ref: "sw=52,5 ne=53,6"}, "unreadable picture"},
		{UnderlaySpec{Path: pic, Ref: "sw=53,5 ne=52,6"}, "corners swapped"},
		{UnderlaySpec{Path: pic, Ref: "sw=52,6 ne=53,5"}, "corners swapped"},
		{UnderlaySpec{Path: pic, Ref: "sw=52,5"}, "both corners"},
		{UnderlaySpec{Path: pic, Ref: "sw=52,5 ne=53,6 crs=lonlat"}, "not both"},
		{UnderlaySpec{Path: pic, Ref: "sw=95,5 ne=96,6"}, "latitude"},
		{UnderlaySpec{Path: pic, Ref: "corner=52,5"}, "unknown key"},
		{UnderlaySpec{Path: pic, Ref: ""}, "no georeference"},
		{UnderlaySpec{Path: pic, Ref: "world=" + utmWorld}, "crs=utm"},
		{UnderlaySpec{Path: pic, Ref: "world=" + utmWorld + " crs=utm:61N"}, "zone 1..60"},
		{UnderlaySpec{Path: pic, Ref: "world=" + short}, "want 6 lines"},
		{UnderlaySpec{Ref: "sw=52,5 ne=53,6"}, "without a picture"},
	} {
		_, err := c.spec.Load()
		if err == nil || !strings.Contains(err.Error(), c.want) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%+v: error %v, want one line with %q", c.spec, err, c.want)
		}
	}
	if u, err := (UnderlaySpec{}).Load(); u != nil || err != nil {
		t.Errorf("no underlay: %v, %v", u, err)
	}
}

// A picture of somewhere else (here 60 km away) is refused, not drawn as
// an empty map; one that overlaps the map is drawn under it (the red
// marker's colour shows in the PNG), in JPEG as in PNG.
func TestRenderUnderlay(t *testing.T) {
	fixes, g := testFix(t) // near 27.5S 153.0E
	dir := t.TempDir()
	pic := markerPicture(t, dir, "sheet.png", 400, 300)
	far, err := UnderlaySpec{Path: pic, Ref: "sw=-27.1,153.4 ne=-26.9,153.6"}.Load()
	if err != nil {
		t.Fatal(err)
	}
	if _, err := Render(fixes, g, "png", Options{SizeCm: 10, Underlay: far}); !errors.Is(err, ErrUnderlayOutside) {
		t.Errorf("far-away underlay: %v, want ErrUnderlayOutside", err)
	}
	// a JPEG of the picture, big red blocks so JPEG's blur keeps them red
	img := image.NewNRGBA(image.Rect(0, 0, 200, 200))
	for j := 0; j < 200; j++ {
		for i := 0; i < 200; i++ {
			c := color.NRGBA{R: 250, G: 250, B: 250, A: 255}
			if (i/20+j/20)%2 == 0 {
				c = color.NRGBA{R: 230, G: 210, B: 40, A: 255}
			}
			img.SetNRGBA(i, j, c)
		}
	}
	var buf bytes.Buffer
	if err := jpeg.Encode(&buf, img, &jpeg.Options{Quality: 95}); err != nil {
		t.Fatal(err)
	}
	jp := filepath.Join(dir, "sheet.jpg")
	if err := os.WriteFile(jp, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	near, err := UnderlaySpec{Path: jp, Ref: "sw=-27.6,152.9 ne=-27.4,153.1"}.Load()
	if err != nil {
		t.Fatal(err)
	}
	out, err := Render(fixes, g, "png", Options{SizeCm: 10, Underlay: near})
	if err != nil {
		t.Fatal(err)
	}
	dec, err := png.Decode(bytes.NewReader(out))
	if err != nil {
		t.Fatal(err)
	}
	// the washed yellow of the checkerboard: 0.7·(230,210,40) + 0.3·255
	yellow := 0
	r := dec.Bounds()
	for y := r.Min.Y; y < r.Max.Y; y++ {
		for x := r.Min.X; x < r.Max.X; x++ {
			cr, cg, cb, _ := dec.At(x, y).RGBA()
			if absDiff(cr>>8, 238) < 14 && absDiff(cg>>8, 224) < 14 && absDiff(cb>>8, 104) < 20 {
				yellow++
			}
		}
	}
	if yellow < r.Dx()*r.Dy()/10 {
		t.Errorf("%d of %d pixels show the underlay's yellow", yellow, r.Dx()*r.Dy())
	}
	if d := os.Getenv("NULLSEEK_PLOT_DIR"); d != "" {
		os.WriteFile(filepath.Join(d, "underlay-check.png"), out, 0o644)
	}
}

// BenchmarkWarp: a 22 cm map's data area at 96 dpi (about 760 pixels a
// side) from a 1200×1200 picture.
func BenchmarkWarp(b *testing.B) {
	dir := b.TempDir()
	img := image.NewNRGBA(image.Rect(0, 0, 1200, 1200))
	var buf bytes.Buffer
	png.Encode(&buf, img)
	pic := filepath.Join(dir, "sheet.png")
	os.WriteFile(pic, buf.Bytes(), 0o644)
	u, err := UnderlaySpec{Path: pic, Ref: "sw=52.15,5.78 ne=52.30,5.98"}.Load()
	if err != nil {
		b.Fatal(err)
	}
	fr := frame{52.22, 5.87}
	for b.Loop() {
		u.warp(fr, -6, -6, 6, 6, 760, 760, warpStep)
	}
}
