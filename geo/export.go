package geo

import (
	"bytes"
	"encoding/json"
	"encoding/xml"
	"fmt"
	"math"
	"nullseek/internal/angle"
	"nullseek/internal/palette"
	"strconv"
	"time"
)

// EllipsePolygon returns n+1 points (lat, lon) of an ellipse around the fix,
// the first repeated at the end, running counter-clockwise seen from above
// (east to north), drawn on the tangent plane at the fix.
func EllipsePolygon(f *Fix, e Ellipse, n int) [][2]float64 {
	if n < 8 {
		n = 8
	}
	th := e.OrientationDeg * deg
	ue, un := math.Sin(th), math.Cos(th) // major axis
	ve, vn := -un, ue                    // minor axis, 90° counter-clockwise of it
	pts := make([][2]float64, 0, n+1)
	for k := 0; k < n; k++ {
		t := 2 * math.Pi * float64(k) / float64(n)
		a, b := e.SemiMajorM*math.Cos(t), e.SemiMinorM*math.Sin(t)
		lat, lon := FromENU(f.Lat, f.Lon, a*ue+b*ve, a*un+b*vn)
		pts = append(pts, [2]float64{lat, lon})
	}
	return append(pts, pts[0])
}

// Line returns n+1 points (lat, lon) along the geodesic leaving the station
// at the LOP's bearing, from the station out to lengthM.
func (l LOP) Line(lengthM float64, n int) [][2]float64 {
	if n < 1 {
		n = 1
	}
	pts := make([][2]float64, 0, n+1)
	for k := 0; k <= n; k++ {
		lat, lon, _ := Direct(l.Lat, l.Lon, l.BearingDeg, lengthM*float64(k)/float64(n))
		pts = append(pts, [2]float64{lat, lon})
	}
	return pts
}

// Limits of what the outputs draw for a fix.
const (
	// MaxDrawnPerStation: a station with more bearings than this is drawn as
	// one line, the weighted mean of its used bearings, plus its rejected
	// bearings.
	MaxDrawnPerStation = 5
	// MaxDrawnRejected bounds the rejected bearings drawn for one fix.
	MaxDrawnRejected = 20
)

// DrawnBearing is a line of position as the map, GeoJSON and KML draw it:
// one bearing (Count 1), or a station's used bearings combined (Count > 1:
// BearingDeg their weighted circular mean, SigmaDeg the sigma of that mean,
// 1/√Σσᵢ⁻², ResidualDeg the mean's residual).
type DrawnBearing struct {
	BearingUse
	Count int
}

// Drawn returns the fix's lines as the outputs draw them (see
// MaxDrawnPerStation), stations in order of first appearance, and how
// many rejected bearings were left undrawn. Invalid bearings are left out.
func (f *Fix) Drawn() (lines []DrawnBearing, undrawn int) {
	type acc struct {
		idx  []int
		used int
	}
	byStation := map[posKey]*acc{}
	var order []posKey
	for i, b := range f.Bearings {
		if b.Validate() != nil {
			continue
		}
		k := posKey{b.Station, b.Lat, b.Lon}
		a := byStation[k]
		if a == nil {
			a = &acc{}
			byStation[k] = a
			order = append(order, k)
		}
		a.idx = append(a.idx, i)
		if b.Used {
			a.used++
		}
	}
	rejected := 0
	for _, k := range order {
		a := byStation[k]
		if len(a.idx) <= MaxDrawnPerStation {
			for _, i := range a.idx {
				lines = append(lines, DrawnBearing{f.Bearings[i], 1})
			}
			continue
		}
		var sn, cs, sw float64
		var first BearingUse
		var rej []DrawnBearing
		for _, i := range a.idx {
			b := f.Bearings[i]
			if !b.Used {
				if rejected < MaxDrawnRejected {
					rej = append(rej, DrawnBearing{b, 1})
				} else {
					undrawn++
				}
				rejected++
				continue
			}
			if sw == 0 {
				first = b
			}
			w := 1 / sq(b.SigmaDeg)
			sn += w * math.Sin(b.BearingDeg*deg)
			cs += w * math.Cos(b.BearingDeg*deg)
			sw += w
		}
		if a.used > 0 {
			c := first
			mean := angle.Wrap360(math.Atan2(sn, cs) * rad)
			c.ResidualDeg = angle.Wrap180(c.ResidualDeg + mean - c.BearingDeg)
			c.BearingDeg, c.SigmaDeg = mean, 1/math.Sqrt(sw)
			c.Row, c.Time = 0, time.Time{}
			lines = append(lines, DrawnBearing{c, a.used})
		}
		lines = append(lines, rej...)
	}
	return lines, undrawn
}

// lopLength is how far a LOP is drawn: past the fix by half the range, at
// least 500 m.
func lopLength(b BearingUse) float64 { return math.Max(1.5*b.DistM, 500) }

// GridOutline returns the grid's border (lat, lon), closed, counter-clockwise.
func (g *Grid) GridOutline() [][2]float64 {
	corners := [][2]float64{{0, 0}, {float64(g.Cols), 0}, {float64(g.Cols), float64(g.Rows)}, {0, float64(g.Rows)}}
	var pts [][2]float64
	for _, c := range corners {
		lat, lon := g.GridToLatLon(c[0], c[1])
		pts = append(pts, [2]float64{lat, lon})
	}
	return ccwRing(append(pts, pts[0]))
}

// ccwRing reverses a closed (lat, lon) ring when it runs clockwise in
// (lon, lat), as RFC 7946 §3.1.6 wants exteriors counter-clockwise.
func ccwRing(r [][2]float64) [][2]float64 {
	if ringArea(r) < 0 {
		for i, j := 0, len(r)-1; i < j; i, j = i+1, j-1 {
			r[i], r[j] = r[j], r[i]
		}
	}
	return r
}

// ringArea is the shoelace signed area of a closed (lat, lon) ring in the
// (lon, lat) plane: positive when counter-clockwise.
func ringArea(r [][2]float64) float64 {
	var a float64
	for i := 0; i+1 < len(r); i++ {
		a += r[i][1]*r[i+1][0] - r[i+1][1]*r[i][0]
	}
	return a / 2
}

type gjGeometry struct {
	Type        string `json:"type"`
	Coordinates any    `json:"coordinates"`
}

type gjFeature struct {
	Type       string         `json:"type"`
	Geometry   gjGeometry     `json:"geometry"`
	Properties map[string]any `json:"properties"`
}

// position is a GeoJSON position [lon, lat] rounded to 1e-7° (~1 cm).
func position(lat, lon float64) [2]float64 { return [2]float64{round(lon, 7), round(lat, 7)} }

func positions(pts [][2]float64) [][2]float64 {
	out := make([][2]float64, len(pts))
	for i, p := range pts {
		out[i] = position(p[0], p[1])
	}
	return out
}

// GeoJSON writes an RFC 7946 FeatureCollection: per fix a Point (kind
// "fix", with the JSON report fields as properties), the ellipse Polygon
// (kind "ellipse"), and a LineString per bearing (kind "lop", used or not);
// each station once as a Point (kind "station"); a station with many
// bearings draws one line for its used ones (see Fix.Drawn; property
// "bearings" is how many a line stands for); the grid border as a
// Polygon (kind "grid") when g is not nil. Positions are [lon, lat];
// polygon rings are closed and counter-clockwise. Each grid (nil ones are
// skipped) adds its border as a Polygon (kind "grid", with its spec), its
// cell lines as LineStrings (kind "grid_line") and its column and row
// labels as Points (kind "grid_label", property "label") just outside the
// first row and column. Ellipse sizes are semi-axes (the property names say
// so). Geometry that crosses the antimeridian is not split (RFC 7946
// §3.1.9), so keep events away from it.
func GeoJSON(fixes []*Fix, grids ...*Grid) ([]byte, error) {
	var feats []gjFeature
	seen := map[string]bool{}
	for _, f := range fixes {
		rep := f.Report()
		props := map[string]any{}
		b, err := json.Marshal(rep)
		if err != nil {
			return nil, err
		}
		if err := json.Unmarshal(b, &props); err != nil {
			return nil, err
		}
		props["kind"] = "fix"
		feats = append(feats, gjFeature{"Feature", gjGeometry{"Point", position(f.Lat, f.Lon)}, props})
		ring := ccwRing(EllipsePolygon(f, f.Ellipse, 72))
		feats = append(feats, gjFeature{"Feature", gjGeometry{"Polygon", [][][2]float64{positions(ring)}},
			map[string]any{"kind": "ellipse", "ident": f.Ident, "probability": f.Ellipse.Probability,
				"semi_major_m": rep.Ellipse.SemiMajorM, "semi_minor_m": rep.Ellipse.SemiMinorM, "orientation_deg": rep.Ellipse.OrientationDeg}})
		lines, _ := f.Drawn()
		for _, d := range lines {
			bu := d.BearingUse
			feats = append(feats, gjFeature{"Feature", gjGeometry{"LineString", positions(bu.Line(lopLength(bu), 16))},
				map[string]any{"kind": "lop", "ident": f.Ident, "station": bu.Station, "bearing_deg": round(bu.BearingDeg, 3),
					"sigma_deg": round(bu.SigmaDeg, 4), "used": bu.Used, "reason": bu.Reason, "bearings": d.Count}})
			if !seen[bu.Station] {
				seen[bu.Station] = true
				feats = append(feats, gjFeature{"Feature", gjGeometry{"Point", position(bu.Lat, bu.Lon)},
					map[string]any{"kind": "station", "station": bu.Station}})
			}
		}
	}
	for _, g := range grids {
		if g == nil {
			continue
		}
		feats = append(feats, gjFeature{"Feature", gjGeometry{"Polygon", [][][2]float64{positions(g.GridOutline())}},
			map[string]any{"kind": "grid", "spec": g.String(), "automatic": g.Auto, "grid": g.Spec()}})
		for _, ln := range g.lines() {
			feats = append(feats, gjFeature{"Feature", gjGeometry{"LineString", positions(ln)},
				map[string]any{"kind": "grid_line", "spec": g.String()}})
		}
		for _, lb := range g.labels() {
			feats = append(feats, gjFeature{"Feature", gjGeometry{"Point", position(lb.lat, lb.lon)},
				map[string]any{"kind": "grid_label", "label": lb.text, "spec": g.String()}})
		}
	}
	if feats == nil {
		feats = []gjFeature{}
	}
	return json.MarshalIndent(map[string]any{"type": "FeatureCollection", "features": feats}, "", " ")
}

// KML document types (OGC KML 2.2).
type kmlDoc struct {
	XMLName xml.Name  `xml:"kml"`
	NS      string    `xml:"xmlns,attr"`
	Doc     kmlFolder `xml:"Document"`
}

type kmlFolder struct {
	Name       string         `xml:"name"`
	Styles     []kmlStyle     `xml:"Style"`
	Placemarks []kmlPlacemark `xml:"Placemark"`
	Folders    []kmlSubFolder `xml:"Folder"`
}

type kmlSubFolder struct {
	Name       string         `xml:"name"`
	Placemarks []kmlPlacemark `xml:"Placemark"`
}

type kmlStyle struct {
	ID        string `xml:"id,attr"`
	LineColor string `xml:"LineStyle>color,omitempty"`
	LineWidth int    `xml:"LineStyle>width,omitempty"`
	PolyColor string `xml:"PolyStyle>color,omitempty"`
}

type kmlPlacemark struct {
	Name        string      `xml:"name"`
	Description string      `xml:"description,omitempty"`
	StyleURL    string      `xml:"styleUrl,omitempty"`
	Point       *kmlCoords  `xml:"Point,omitempty"`
	LineString  *kmlCoords  `xml:"LineString,omitempty"`
	Polygon     *kmlPolygon `xml:"Polygon,omitempty"`
}

type kmlCoords struct {
	Coordinates string `xml:"coordinates"`
}

type kmlPolygon struct {
	Outer kmlCoords `xml:"outerBoundaryIs>LinearRing"`
}

func kmlCoordString(pts [][2]float64) string {
	var b bytes.Buffer
	for i, p := range pts {
		if i > 0 {
			b.WriteByte(' ')
		}
		fmt.Fprintf(&b, "%.7f,%.7f,0", p[1], p[0])
	}
	return b.String()
}

// KML writes the same content as GeoJSON as an OGC KML 2.2 document
// (coordinates lon,lat,alt; colours aabbggrr), in the map's colours
// (internal/palette): each transmitter's bearings in its colour (the i-th
// fix takes the i-th colour, as on the map), rejected bearings grey, the
// ellipse red, the grid green, its cell lines and labels in a folder of
// their own.
func KML(fixes []*Fix, grids ...*Grid) ([]byte, error) {
	doc := kmlDoc{NS: "http://www.opengis.net/kml/2.2"}
	doc.Doc.Name = "nullseek fixes"
	for i := range palette.Transmitters {
		doc.Doc.Styles = append(doc.Doc.Styles, kmlStyle{ID: "tx" + strconv.Itoa(i), LineColor: palette.KML(palette.Transmitter(i)), LineWidth: 2})
	}
	doc.Doc.Styles = append(doc.Doc.Styles,
		kmlStyle{ID: "rejected", LineColor: palette.KML(palette.Rejected), LineWidth: 1},
		kmlStyle{ID: "ellipse", LineColor: palette.KML(palette.Ellipse), LineWidth: 2, PolyColor: palette.KML(palette.WithAlpha(palette.Ellipse, 0x40))},
		kmlStyle{ID: "grid", LineColor: palette.KML(palette.Grid), LineWidth: 1, PolyColor: "00000000"},
	)
	pm := &doc.Doc.Placemarks
	seen := map[string]bool{}
	for fi, f := range fixes {
		e := f.Ellipse
		grid := ""
		if f.Grid != nil {
			grid = "; grid " + f.Grid.String()
		}
		*pm = append(*pm, kmlPlacemark{Name: f.Ident,
			Description: fmt.Sprintf("%s %s; %.0f%% ellipse semi-axes %.0f m and %.0f m (full axes %.0f m by %.0f m), major axis %.0f deg true; grid cell %s%s",
				f.Maidenhead, fmtLatLon(f.Lat, f.Lon), 100*e.Probability, e.SemiMajorM, e.SemiMinorM, 2*e.SemiMajorM, 2*e.SemiMinorM, e.OrientationDeg, f.GridCell, grid),
			Point: &kmlCoords{kmlCoordString([][2]float64{{f.Lat, f.Lon}})}})
		*pm = append(*pm, kmlPlacemark{Name: f.Ident + " ellipse", StyleURL: "#ellipse",
			Polygon: &kmlPolygon{kmlCoords{kmlCoordString(ccwRing(EllipsePolygon(f, e, 72)))}}})
		used := "#tx" + strconv.Itoa(fi%len(palette.Transmitters))
		lines, _ := f.Drawn()
		for _, d := range lines {
			bu := d.BearingUse
			style, desc := used, fmt.Sprintf("%.1f deg true, sigma %.1f deg", bu.BearingDeg, bu.SigmaDeg)
			if d.Count > 1 {
				desc = fmt.Sprintf("mean of %d bearings: %.2f deg true, sigma of the mean %.2f deg", d.Count, bu.BearingDeg, bu.SigmaDeg)
			}
			if !bu.Used {
				style, desc = "#rejected", desc+"; rejected: "+bu.Reason
			}
			*pm = append(*pm, kmlPlacemark{Name: f.Ident + " from " + bu.Station, Description: desc, StyleURL: style,
				LineString: &kmlCoords{kmlCoordString(bu.Line(lopLength(bu), 16))}})
			if !seen[bu.Station] {
				seen[bu.Station] = true
				*pm = append(*pm, kmlPlacemark{Name: bu.Station, Point: &kmlCoords{kmlCoordString([][2]float64{{bu.Lat, bu.Lon}})}})
			}
		}
	}
	for _, g := range grids {
		if g == nil {
			continue
		}
		*pm = append(*pm, kmlPlacemark{Name: "event grid", Description: g.String(), StyleURL: "#grid",
			Polygon: &kmlPolygon{kmlCoords{kmlCoordString(g.GridOutline())}}})
		sub := kmlSubFolder{Name: "event grid " + g.String()}
		for _, ln := range g.lines() {
			sub.Placemarks = append(sub.Placemarks, kmlPlacemark{Name: "grid line", StyleURL: "#grid", LineString: &kmlCoords{kmlCoordString(ln)}})
		}
		for _, lb := range g.labels() {
			sub.Placemarks = append(sub.Placemarks, kmlPlacemark{Name: lb.text, Description: "grid label", Point: &kmlCoords{kmlCoordString([][2]float64{{lb.lat, lb.lon}})}})
		}
		doc.Doc.Folders = append(doc.Doc.Folders, sub)
	}
	out, err := xml.MarshalIndent(doc, "", " ")
	if err != nil {
		return nil, err
	}
	return append([]byte(xml.Header), out...), nil
}

// gridLabel is a column or row label and where it is drawn.
type gridLabel struct {
	text     string
	lat, lon float64
}

// lines returns the grid's cell lines (lat, lon pairs), columns then rows.
func (g *Grid) lines() [][][2]float64 {
	var out [][][2]float64
	seg := func(ax, ay, bx, by float64) {
		la, lo := g.GridToLatLon(ax, ay)
		lb, lob := g.GridToLatLon(bx, by)
		out = append(out, [][2]float64{{la, lo}, {lb, lob}})
	}
	for i := 1; i < g.Cols; i++ {
		seg(float64(i), 0, float64(i), float64(g.Rows))
	}
	for j := 1; j < g.Rows; j++ {
		seg(0, float64(j), float64(g.Cols), float64(j))
	}
	return out
}

// labels returns the column letters just outside the first row and the row
// numbers just outside the first column, as on the map.
func (g *Grid) labels() []gridLabel {
	var out []gridLabel
	for i := 0; i < g.Cols; i++ {
		la, lo := g.GridToLatLon(float64(i)+0.5, -0.35)
		out = append(out, gridLabel{ColumnLabel(g.FirstCol + i), la, lo})
	}
	for j := 0; j < g.Rows; j++ {
		la, lo := g.GridToLatLon(-0.35, float64(j)+0.5)
		out = append(out, gridLabel{strconv.Itoa(g.FirstRow + j), la, lo})
	}
	return out
}

// fmtLatLon formats a position as "51.50000N 0.12000W".
func fmtLatLon(lat, lon float64) string {
	ns, ew := 'N', 'E'
	if lat < 0 {
		ns = 'S'
	}
	if lon < 0 {
		ew = 'W'
	}
	return fmt.Sprintf("%.5f%c %.5f%c", math.Abs(lat), ns, math.Abs(lon), ew)
}

// FormatLatLon formats a position for people: "51.50000N 0.12000W".
func FormatLatLon(lat, lon float64) string { return fmtLatLon(lat, lon) }
