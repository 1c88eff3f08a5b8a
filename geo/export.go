package geo

import (
	"bytes"
	"encoding/json"
	"encoding/xml"
	"fmt"
	"math"
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
// each station once as a Point (kind "station"); the grid border as a
// Polygon (kind "grid") when g is not nil. Positions are [lon, lat];
// polygon rings are closed and counter-clockwise. Geometry that crosses the
// antimeridian is not split (RFC 7946 §3.1.9), so keep events away from it.
func GeoJSON(fixes []*Fix, g *Grid) ([]byte, error) {
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
		for _, bu := range f.Bearings {
			if bu.Validate() != nil {
				continue
			}
			feats = append(feats, gjFeature{"Feature", gjGeometry{"LineString", positions(bu.Line(lopLength(bu), 16))},
				map[string]any{"kind": "lop", "ident": f.Ident, "station": bu.Station, "bearing_deg": round(bu.BearingDeg, 3),
					"sigma_deg": bu.SigmaDeg, "used": bu.Used, "reason": bu.Reason}})
			if !seen[bu.Station] {
				seen[bu.Station] = true
				feats = append(feats, gjFeature{"Feature", gjGeometry{"Point", position(bu.Lat, bu.Lon)},
					map[string]any{"kind": "station", "station": bu.Station}})
			}
		}
	}
	if g != nil {
		feats = append(feats, gjFeature{"Feature", gjGeometry{"Polygon", [][][2]float64{positions(g.GridOutline())}},
			map[string]any{"kind": "grid", "spec": g.String(), "automatic": g.Auto}})
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
// (coordinates lon,lat,alt; colours aabbggrr).
func KML(fixes []*Fix, g *Grid) ([]byte, error) {
	doc := kmlDoc{NS: "http://www.opengis.net/kml/2.2"}
	doc.Doc.Name = "nullseek fixes"
	doc.Doc.Styles = []kmlStyle{
		{ID: "used", LineColor: "ff0000cc", LineWidth: 2},
		{ID: "rejected", LineColor: "ff888888", LineWidth: 1},
		{ID: "ellipse", LineColor: "ffcc0000", LineWidth: 2, PolyColor: "40cc0000"},
		{ID: "grid", LineColor: "ff00aa00", LineWidth: 1, PolyColor: "00000000"},
	}
	pm := &doc.Doc.Placemarks
	seen := map[string]bool{}
	for _, f := range fixes {
		e := f.Ellipse
		*pm = append(*pm, kmlPlacemark{Name: f.Ident,
			Description: fmt.Sprintf("%s %s; %.0f%% ellipse %.0f m x %.0f m, major axis %.0f deg true; grid cell %s",
				f.Maidenhead, fmtLatLon(f.Lat, f.Lon), 100*e.Probability, e.SemiMajorM, e.SemiMinorM, e.OrientationDeg, f.GridCell),
			Point: &kmlCoords{kmlCoordString([][2]float64{{f.Lat, f.Lon}})}})
		*pm = append(*pm, kmlPlacemark{Name: f.Ident + " ellipse", StyleURL: "#ellipse",
			Polygon: &kmlPolygon{kmlCoords{kmlCoordString(ccwRing(EllipsePolygon(f, e, 72)))}}})
		for _, bu := range f.Bearings {
			if bu.Validate() != nil {
				continue
			}
			style, desc := "#used", fmt.Sprintf("%.1f deg true, sigma %.1f deg", bu.BearingDeg, bu.SigmaDeg)
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
	if g != nil {
		*pm = append(*pm, kmlPlacemark{Name: "event grid", Description: g.String(), StyleURL: "#grid",
			Polygon: &kmlPolygon{kmlCoords{kmlCoordString(g.GridOutline())}}})
	}
	out, err := xml.MarshalIndent(doc, "", " ")
	if err != nil {
		return nil, err
	}
	return append([]byte(xml.Header), out...), nil
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
