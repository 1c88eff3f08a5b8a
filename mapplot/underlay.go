package mapplot

import (
	"bufio"
	"errors"
	"fmt"
	"image"
	stddraw "image/draw"
	_ "image/jpeg" // decoder registration: JPEG underlays
	_ "image/png"  // decoder registration: PNG underlays
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"nullseek/geo"
	"nullseek/internal/units"
)

// An underlay is an event's own printed or scanned map (PNG or JPEG) drawn
// under the stations, lines of position and ellipses. Its georeference is
// given one of two ways (UnderlaySpec.Ref):
//
//   - "sw=LAT,LON ne=LAT,LON": the outer corners of the picture (the
//     outer edge of its corner pixels) for a picture whose edges are
//     parallels and meridians and whose columns are linear in longitude and
//     rows linear in latitude (an equirectangular grid, as a lat/lon
//     georeferenced scan is). A picture on another projection fitted by
//     its corners is placed only approximately: for a UTM-gridded sheet
//     the error grows with the meridian convergence (up to about 3° near
//     a zone's edge at mid latitudes); give its world file instead.
//   - "world[=FILE] [crs=lonlat|utm:ZONE{N|S}]": an ESRI world file (six
//     lines A, D, B, E, C, F: X = A·col + B·row + C, Y = D·col + E·row + F,
//     col and row counted from the centre of the top-left pixel; ESRI,
//     "World files for raster datasets", ArcGIS documentation). The
//     coordinates are longitude/latitude degrees on WGS84 (crs=lonlat, the
//     default) or WGS84 UTM eastings/northings in metres (crs=utm:32N).
//     Without FILE the world file beside the picture is read: the
//     extension's first and last letters and "w" (.pgw, .jgw), the
//     extension and "w" (.pngw), or .wld.
//
// An empty Ref means "world" with its defaults.
//
// Drawing (inverse mapping): every pixel of the map's raster, at the
// picture's output resolution, is taken from the map's own plane (the
// azimuthal equidistant projection about the map origin, geo.FromENU) to
// latitude and longitude, then through the georeference to a position in
// the picture, where the four nearest pixels are blended (bilinear
// interpolation, on premultiplied colour). Positions are exact at nodes
// every warpStep output pixels and interpolated linearly between them;
// over a node cell (a few hundred metres even on a 40 km map) the
// projection's curvature moves a position by far less than a hundredth of
// a pixel, so a sampled colour by a level or two of 255
// (TestWarpMeshAgreesWithExact). The picture is washed
// towards white (underlayWash) so what is drawn over it stays readable.

// UnderlaySpec names an underlay: the picture and its georeference.
type UnderlaySpec struct {
	// Path is the PNG or JPEG picture; "" for no underlay.
	Path string
	// Ref is the georeference (see the package's underlay notes).
	Ref string
}

// Underlay is a decoded, georeferenced picture ready to draw.
type Underlay struct {
	name string
	img  *image.RGBA // premultiplied, origin (0, 0)
	// toPixel maps a position to continuous picture coordinates: (0, 0)
	// the outer top-left corner, (w, h) the outer bottom-right corner.
	toPixel func(lat, lon float64) (px, py float64)
}

// MaxUnderlayPixels bounds the picture's size, and with it the memory it
// takes (4 bytes a pixel, held twice while decoding): an A3 sheet scanned
// at 400 dpi is about 31 megapixels, at 300 dpi 17.
const MaxUnderlayPixels = 40_000_000

// underlayWash is the share of white mixed into the picture.
const underlayWash = 0.3

// warpStep is the spacing in output pixels of the exactly projected nodes.
const warpStep = 8

// ErrUnderlayOutside: the underlay covers none of the map's area.
var ErrUnderlayOutside = errors.New("the picture covers none of the map's area")

// Load reads and checks the picture and its georeference; nil, nil when
// no picture is named. Errors name the file and what is wrong.
func (s UnderlaySpec) Load() (*Underlay, error) {
	if s.Path == "" {
		if strings.TrimSpace(s.Ref) != "" {
			return nil, errors.New("an underlay georeference is given without a picture (--underlay)")
		}
		return nil, nil
	}
	ref, err := parseRef(s.Ref)
	if err != nil {
		return nil, fmt.Errorf("underlay %s: %w", s.Path, err)
	}
	img, err := decodePicture(s.Path)
	if err != nil {
		return nil, err
	}
	b := img.Bounds()
	u := &Underlay{name: s.Path, img: image.NewRGBA(image.Rect(0, 0, b.Dx(), b.Dy()))}
	stddraw.Draw(u.img, u.img.Bounds(), img, b.Min, stddraw.Src)
	w, h := float64(b.Dx()), float64(b.Dy())
	if ref.corners {
		s, wl, n, e := ref.swLat, ref.swLon, ref.neLat, ref.neLon
		u.toPixel = func(lat, lon float64) (float64, float64) {
			return math.Mod(lon-wl+720, 360) / e * w, (n - lat) / (n - s) * h
		}
		return u, nil
	}
	wf := ref.world
	if wf == "" {
		if wf, err = findWorldFile(s.Path); err != nil {
			return nil, err
		}
	}
	aff, err := readWorldFile(wf)
	if err != nil {
		return nil, err
	}
	det := aff[0]*aff[3] - aff[2]*aff[1] // A·E − B·D
	if det == 0 || math.IsNaN(det) {
		return nil, fmt.Errorf("world file %s: the pixel sizes make no area (A·E − B·D = 0)", wf)
	}
	A, D, B, E, C, F := aff[0], aff[1], aff[2], aff[3], aff[4], aff[5]
	// Corner check: the picture's corners must be positions in the CRS.
	for _, c := range [][2]float64{{-0.5, -0.5}, {w - 0.5, -0.5}, {-0.5, h - 0.5}, {w - 0.5, h - 0.5}} {
		X, Y := A*c[0]+B*c[1]+C, D*c[0]+E*c[1]+F
		if ref.utmZone == 0 && !(math.Abs(Y) <= 90 && math.Abs(X) <= 540) {
			return nil, fmt.Errorf("world file %s: corner %.6g, %.6g is not longitude, latitude in degrees; for a UTM grid add crs=utm:ZONE (e.g. crs=utm:32N) to --underlay-ref", wf, X, Y)
		}
		if ref.utmZone != 0 && !(X > 0 && X < 1e6 && Y > -1e5 && Y < 1e7) {
			return nil, fmt.Errorf("world file %s: corner %.6g, %.6g is not a UTM easting, northing in metres", wf, X, Y)
		}
	}
	inv := func(X, Y float64) (float64, float64) {
		dx, dy := X-C, Y-F
		col := (E*dx - B*dy) / det
		row := (A*dy - D*dx) / det
		return col + 0.5, row + 0.5
	}
	if ref.utmZone == 0 {
		u.toPixel = func(lat, lon float64) (float64, float64) {
			// the longitude taken nearest the world file's origin
			return inv(C+math.Remainder(lon-C, 360), lat)
		}
	} else {
		zone, south := ref.utmZone, ref.utmSouth
		u.toPixel = func(lat, lon float64) (float64, float64) {
			e, n := UTM(lat, lon, zone, south)
			return inv(e, n)
		}
	}
	return u, nil
}

type georef struct {
	corners                    bool
	swLat, swLon, neLat, neLon float64 // neLon holds the width in degrees east of swLon
	world                      string
	utmZone                    int
	utmSouth                   bool
}

// parseRef reads the georeference spec (see the package's underlay notes).
func parseRef(spec string) (georef, error) {
	var r georef
	kv := map[string]string{}
	var last string
	for _, tok := range strings.Fields(spec) {
		k, v, ok := strings.Cut(tok, "=")
		switch {
		case ok:
			k = strings.ToLower(k)
			if _, dup := kv[k]; dup {
				return r, fmt.Errorf("--underlay-ref: %s= given twice", k)
			}
			kv[k], last = v, k
		case strings.EqualFold(tok, "world") && last == "":
			kv["world"], last = "", "world"
		case last == "sw" || last == "ne":
			kv[last] += " " + tok // a position written "52:14:32N 5:52:01E"
		default:
			return r, fmt.Errorf("--underlay-ref: %q is not KEY=VALUE (want \"sw=LAT,LON ne=LAT,LON\" or \"world[=FILE] [crs=lonlat|utm:ZONE{N|S}]\")", tok)
		}
	}
	_, sw := kv["sw"]
	_, ne := kv["ne"]
	_, wo := kv["world"]
	crs, hasCRS := kv["crs"]
	for k := range kv {
		if k != "sw" && k != "ne" && k != "world" && k != "crs" {
			return r, fmt.Errorf("--underlay-ref: unknown key %s= (keys: sw, ne, world, crs)", k)
		}
	}
	if sw || ne {
		if !sw || !ne {
			return r, errors.New("--underlay-ref: give both corners, sw=LAT,LON and ne=LAT,LON")
		}
		if wo || hasCRS {
			return r, errors.New("--underlay-ref: give the corners or a world file, not both")
		}
		var err error
		if r.swLat, r.swLon, err = units.ParseLatLon(kv["sw"]); err != nil {
			return r, fmt.Errorf("--underlay-ref sw=: %w", err)
		}
		if r.neLat, r.neLon, err = units.ParseLatLon(kv["ne"]); err != nil {
			return r, fmt.Errorf("--underlay-ref ne=: %w", err)
		}
		if r.swLat >= r.neLat {
			return r, fmt.Errorf("--underlay-ref: the south-west corner (latitude %g) is not south of the north-east corner (latitude %g): corners swapped?", r.swLat, r.neLat)
		}
		// A picture may straddle the 180° meridian, but none is half the
		// globe wide: a width past 180° is a west edge east of the east one.
		width := math.Mod(r.neLon-r.swLon+720, 360)
		if width == 0 || width > 180 {
			return r, fmt.Errorf("--underlay-ref: the south-west corner (longitude %g) is not west of the north-east corner (longitude %g): corners swapped?", r.swLon, r.neLon)
		}
		r.corners, r.neLon = true, width
		return r, nil
	}
	r.world = kv["world"]
	if hasCRS {
		c := strings.ToLower(crs)
		switch {
		case c == "lonlat":
		case strings.HasPrefix(c, "utm:") && len(c) > 5:
			z, hemi := c[4:len(c)-1], c[len(c)-1]
			n, err := strconv.Atoi(z)
			if err != nil || n < 1 || n > 60 || (hemi != 'n' && hemi != 's') {
				return r, fmt.Errorf("--underlay-ref crs=%s: want utm:ZONE followed by N or S, zone 1..60 (e.g. utm:32N)", crs)
			}
			r.utmZone, r.utmSouth = n, hemi == 's'
		default:
			return r, fmt.Errorf("--underlay-ref crs=%s: want lonlat or utm:ZONE{N|S}", crs)
		}
	}
	return r, nil
}

func decodePicture(path string) (image.Image, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("underlay: %w", err)
	}
	defer fh.Close()
	br := bufio.NewReader(fh)
	head, _ := br.Peek(8)
	isPNG := len(head) == 8 && string(head) == "\x89PNG\r\n\x1a\n"                    // ISO/IEC 15948 §5.2 signature
	isJPEG := len(head) >= 3 && head[0] == 0xFF && head[1] == 0xD8 && head[2] == 0xFF // ITU-T T.81 SOI marker
	if !isPNG && !isJPEG {
		return nil, fmt.Errorf("underlay %s: not a PNG or JPEG picture", path)
	}
	cfg, _, err := image.DecodeConfig(br)
	if err != nil {
		return nil, fmt.Errorf("underlay %s: unreadable picture: %w", path, err)
	}
	if cfg.Width < 2 || cfg.Height < 2 || float64(cfg.Width)*float64(cfg.Height) > MaxUnderlayPixels {
		return nil, fmt.Errorf("underlay %s: %d×%d pixels is outside 2×2 .. %d megapixels", path, cfg.Width, cfg.Height, MaxUnderlayPixels/1_000_000)
	}
	if _, err := fh.Seek(0, 0); err != nil {
		return nil, fmt.Errorf("underlay: %w", err)
	}
	img, _, err := image.Decode(bufio.NewReader(fh))
	if err != nil {
		return nil, fmt.Errorf("underlay %s: unreadable picture: %w", path, err)
	}
	return img, nil
}

// findWorldFile returns the world file beside the picture.
func findWorldFile(pic string) (string, error) {
	ext := filepath.Ext(pic)
	base := strings.TrimSuffix(pic, ext)
	e := strings.TrimPrefix(ext, ".")
	var names []string
	if len(e) >= 2 {
		names = append(names, base+"."+e[:1]+e[len(e)-1:]+"w", base+"."+e[:1]+e[len(e)-1:]+"W")
	}
	names = append(names, pic+"w", pic+"W", base+".wld", base+".WLD")
	for _, n := range names {
		if st, err := os.Stat(n); err == nil && st.Mode().IsRegular() {
			return n, nil
		}
	}
	return "", fmt.Errorf("underlay %s: no georeference: give --underlay-ref \"sw=LAT,LON ne=LAT,LON\" or put a world file beside it (%s)", pic, filepath.Base(names[0]))
}

// readWorldFile reads the six numbers A, D, B, E, C, F.
func readWorldFile(path string) ([6]float64, error) {
	var v [6]float64
	b, err := os.ReadFile(path)
	if err != nil {
		return v, fmt.Errorf("world file: %w", err)
	}
	f := strings.Fields(string(b))
	if len(f) != 6 {
		return v, fmt.Errorf("world file %s: %d values, want 6 lines (A, D, B, E, C, F)", path, len(f))
	}
	for i, s := range f {
		x, err := strconv.ParseFloat(s, 64)
		if err != nil || math.IsInf(x, 0) || math.IsNaN(x) {
			return v, fmt.Errorf("world file %s: line %d %q is not a number", path, i+1, s)
		}
		v[i] = x
	}
	return v, nil
}

// warp renders the underlay onto a w×h raster that spans x0..x1 km east
// and y0..y1 km north in the frame fr (row 0 on top; pixel centres), and
// returns it with the share of its pixels that fall on the picture.
// Positions are exact every step pixels and interpolated between.
func (u *Underlay) warp(fr frame, x0, y0, x1, y1 float64, w, h, step int) (*image.RGBA, float64) {
	out := image.NewRGBA(image.Rect(0, 0, w, h))
	// Exact picture positions at the nodes.
	nx, ny := (w+step-1)/step+1, (h+step-1)/step+1
	node := make([][2]float64, nx*ny)
	for j := 0; j < ny; j++ {
		for i := 0; i < nx; i++ {
			x := x0 + (float64(i*step)+0.5)*(x1-x0)/float64(w)
			y := y1 - (float64(j*step)+0.5)*(y1-y0)/float64(h)
			lat, lon := geo.FromENU(fr.lat0, fr.lon0, x*1e3, y*1e3)
			px, py := u.toPixel(lat, lon)
			node[j*nx+i] = [2]float64{px, py}
		}
	}
	pw, ph := u.img.Rect.Dx(), u.img.Rect.Dy()
	hit := 0
	for j := 0; j < h; j++ {
		nj, fj := j/step, float64(j%step)/float64(step)
		for i := 0; i < w; i++ {
			ni, fi := i/step, float64(i%step)/float64(step)
			a, b := node[nj*nx+ni], node[nj*nx+ni+1]
			c, d := node[(nj+1)*nx+ni], node[(nj+1)*nx+ni+1]
			px := (1-fj)*((1-fi)*a[0]+fi*b[0]) + fj*((1-fi)*c[0]+fi*d[0])
			py := (1-fj)*((1-fi)*a[1]+fi*b[1]) + fj*((1-fi)*c[1]+fi*d[1])
			if !(px >= 0 && px <= float64(pw) && py >= 0 && py <= float64(ph)) {
				continue
			}
			hit++
			r, g, bl, al := u.bilinear(px-0.5, py-0.5)
			// wash towards white: premultiplied, so white is (α, α, α, α)
			k := 1 - underlayWash
			o := out.PixOffset(i, j)
			out.Pix[o+0] = uint8(math.Round(k*r + underlayWash*al))
			out.Pix[o+1] = uint8(math.Round(k*g + underlayWash*al))
			out.Pix[o+2] = uint8(math.Round(k*bl + underlayWash*al))
			out.Pix[o+3] = uint8(math.Round(al))
		}
	}
	return out, float64(hit) / float64(w*h)
}

// bilinear samples the picture at (x, y) in pixel-centre coordinates
// (pixel (i, j)'s centre is (i, j)), clamped to the edge pixels.
func (u *Underlay) bilinear(x, y float64) (r, g, b, a float64) {
	pw, ph := u.img.Rect.Dx(), u.img.Rect.Dy()
	x = math.Min(math.Max(x, 0), float64(pw-1))
	y = math.Min(math.Max(y, 0), float64(ph-1))
	i0, j0 := int(x), int(y)
	i1, j1 := min(i0+1, pw-1), min(j0+1, ph-1)
	fx, fy := x-float64(i0), y-float64(j0)
	var acc [4]float64
	for _, s := range []struct {
		i, j int
		w    float64
	}{{i0, j0, (1 - fx) * (1 - fy)}, {i1, j0, fx * (1 - fy)}, {i0, j1, (1 - fx) * fy}, {i1, j1, fx * fy}} {
		o := u.img.PixOffset(s.i, s.j)
		for k := 0; k < 4; k++ {
			acc[k] += s.w * float64(u.img.Pix[o+k])
		}
	}
	return acc[0], acc[1], acc[2], acc[3]
}

// coverage is the share of the area x0..x1, y0..y1 (km in fr) that the
// picture covers, on a coarse raster (for the check before drawing).
func (u *Underlay) coverage(fr frame, x0, y0, x1, y1 float64) float64 {
	_, f := u.warp(fr, x0, y0, x1, y1, 64, 64, 1)
	return f
}

// underlayPlotter draws the warped picture over the whole data area at the
// canvas's resolution.
type underlayPlotter struct {
	u              *Underlay
	fr             frame
	x0, y0, x1, y1 float64
}

func (up underlayPlotter) Plot(c draw.Canvas, p *plot.Plot) {
	// the raster at the canvas's own resolution (vgimg canvases tell it;
	// a vector canvas gets 150 dots per inch)
	dpi := 150.0
	if d, ok := c.Canvas.(interface{ DPI() float64 }); ok {
		dpi = d.DPI()
	}
	trX, trY := p.Transforms(&c)
	minX, maxX := trX(up.x0), trX(up.x1)
	minY, maxY := trY(up.y0), trY(up.y1)
	w := int(math.Ceil(float64(maxX-minX) / vg.Inch.Points() * dpi))
	h := int(math.Ceil(float64(maxY-minY) / vg.Inch.Points() * dpi))
	if w < 1 || h < 1 {
		return
	}
	img, _ := up.u.warp(up.fr, up.x0, up.y0, up.x1, up.y1, w, h, warpStep)
	c.DrawImage(vg.Rectangle{Min: vg.Point{X: minX, Y: minY}, Max: vg.Point{X: maxX, Y: maxY}}, img)
}
