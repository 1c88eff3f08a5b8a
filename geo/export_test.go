package geo

import (
	"encoding/json"
	"encoding/xml"
	"math"
	"nullseek/internal/angle"
	"strconv"
	"strings"
	"testing"
)

func exportFixture(t *testing.T) ([]*Fix, *Grid) {
	t.Helper()
	lat0, lon0 := 47.25, 8.75 // lon ≠ lat so a swapped order shows
	var lops []LOP
	for i, az := range []float64{20, 140, 250, 320} {
		la, lo, _ := Direct(lat0, lon0, az, 2000+500*float64(i))
		_, b, _ := Inverse(la, lo, lat0, lon0)
		if i == 3 {
			b += 40 // rejected as an outlier
		}
		lops = append(lops, LOP{Ident: "T<&>1", Station: "S" + strconv.Itoa(i), Lat: la, Lon: lo, BearingDeg: angle.Wrap360(b + 0.5*float64(i%2)), SigmaDeg: 2})
	}
	f, err := SolveFix(lops, FixOptions{})
	if err != nil {
		t.Fatal(err)
	}
	g, err := ParseGrid("origin=47.27,8.72 cell=250 rotation=15 cols=A-P rows=1-12")
	if err != nil {
		t.Fatal(err)
	}
	if err := f.Place(g, 2); err != nil {
		t.Fatal(err)
	}
	return []*Fix{f}, g
}

// GeoJSON checked structurally against RFC 7946: §3.3 FeatureCollection
// with "features"; §3.2 Feature with geometry and properties; §3.1.1
// positions [lon, lat]; §3.1.4 LineString ≥ 2 positions; §3.1.6 linear
// rings closed, ≥ 4 positions, exterior counter-clockwise.
func TestGeoJSONStructure(t *testing.T) {
	fixes, g := exportFixture(t)
	data, err := GeoJSON(fixes, g)
	if err != nil {
		t.Fatal(err)
	}
	var fc struct {
		Type     string `json:"type"`
		Features []struct {
			Type     string `json:"type"`
			Geometry struct {
				Type        string          `json:"type"`
				Coordinates json.RawMessage `json:"coordinates"`
			} `json:"geometry"`
			Properties map[string]any `json:"properties"`
		} `json:"features"`
	}
	if err := json.Unmarshal(data, &fc); err != nil {
		t.Fatal(err)
	}
	if fc.Type != "FeatureCollection" || len(fc.Features) == 0 {
		t.Fatalf("type %q, %d features", fc.Type, len(fc.Features))
	}
	checkPos := func(p []float64) {
		if len(p) < 2 || p[0] < -180 || p[0] > 180 || p[1] < -90 || p[1] > 90 {
			t.Errorf("bad position %v", p)
		}
	}
	kinds := map[string]int{}
	for _, ft := range fc.Features {
		if ft.Type != "Feature" || ft.Properties == nil {
			t.Errorf("feature type %q props %v", ft.Type, ft.Properties)
		}
		kind, _ := ft.Properties["kind"].(string)
		kinds[kind]++
		switch ft.Geometry.Type {
		case "Point":
			var p []float64
			if err := json.Unmarshal(ft.Geometry.Coordinates, &p); err != nil {
				t.Fatal(err)
			}
			checkPos(p)
			if kind == "fix" && (abs(p[0]-fixes[0].Lon) > 1e-6 || abs(p[1]-fixes[0].Lat) > 1e-6) {
				t.Errorf("fix point %v is not [lon, lat] = [%v, %v]", p, fixes[0].Lon, fixes[0].Lat)
			}
		case "LineString":
			var ps [][]float64
			if err := json.Unmarshal(ft.Geometry.Coordinates, &ps); err != nil {
				t.Fatal(err)
			}
			if len(ps) < 2 {
				t.Errorf("LineString with %d positions", len(ps))
			}
			for _, p := range ps {
				checkPos(p)
			}
		case "Polygon":
			var rings [][][]float64
			if err := json.Unmarshal(ft.Geometry.Coordinates, &rings); err != nil {
				t.Fatal(err)
			}
			for _, r := range rings {
				if len(r) < 4 {
					t.Errorf("ring with %d positions", len(r))
					continue
				}
				first, last := r[0], r[len(r)-1]
				if first[0] != last[0] || first[1] != last[1] {
					t.Errorf("%s ring not closed", kind)
				}
				var a float64
				for i := 0; i+1 < len(r); i++ {
					checkPos(r[i])
					a += r[i][0]*r[i+1][1] - r[i+1][0]*r[i][1]
				}
				if a <= 0 {
					t.Errorf("%s exterior ring is clockwise (area %v)", kind, a)
				}
			}
		default:
			t.Errorf("unexpected geometry %q", ft.Geometry.Type)
		}
	}
	if kinds["fix"] != 1 || kinds["ellipse"] != 1 || kinds["lop"] != 4 || kinds["station"] != 4 || kinds["grid"] != 1 {
		t.Errorf("feature kinds %v", kinds)
	}
}

func abs(x float64) float64 {
	if x < 0 {
		return -x
	}
	return x
}

// KML must be well-formed XML with the OGC KML 2.2 namespace and
// "lon,lat,alt" coordinate tuples (OGC 07-147r2 §16.9.1).
func TestKMLParses(t *testing.T) {
	fixes, g := exportFixture(t)
	data, err := KML(fixes, g)
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		XMLName    xml.Name
		Placemarks []struct {
			Name  string `xml:"name"`
			Point string `xml:"Point>coordinates"`
			Ring  string `xml:"Polygon>outerBoundaryIs>LinearRing>coordinates"`
		} `xml:"Document>Placemark"`
	}
	if err := xml.Unmarshal(data, &doc); err != nil {
		t.Fatalf("KML is not XML: %v", err)
	}
	if doc.XMLName.Space != "http://www.opengis.net/kml/2.2" || doc.XMLName.Local != "kml" {
		t.Errorf("root %v", doc.XMLName)
	}
	if len(doc.Placemarks) != 1+1+4+4+1 {
		t.Errorf("%d placemarks", len(doc.Placemarks))
	}
	if doc.Placemarks[0].Name != "T<&>1" {
		t.Errorf("name %q not escaped/unescaped properly", doc.Placemarks[0].Name)
	}
	pt := strings.Split(doc.Placemarks[0].Point, ",")
	lon, _ := strconv.ParseFloat(pt[0], 64)
	lat, _ := strconv.ParseFloat(pt[1], 64)
	if len(pt) != 3 || abs(lon-fixes[0].Lon) > 1e-6 || abs(lat-fixes[0].Lat) > 1e-6 {
		t.Errorf("fix coordinates %v", pt)
	}
	if r := doc.Placemarks[1].Ring; len(strings.Fields(r)) != 73 {
		t.Errorf("ellipse ring has %d tuples, want 73", len(strings.Fields(r)))
	}
}

// A station with many bearings is drawn as one line: their weighted mean,
// with the sigma of a weighted mean, 1/√Σσᵢ⁻² (σ/√n for equal sigmas;
// common practice); rejected bearings are drawn one by one, and stations
// with few bearings bearing by bearing.
func TestDrawnCombinesBusyStations(t *testing.T) {
	lat0, lon0 := 47.25, 8.75
	mk := func(st string, az, dist, off float64) LOP {
		la, lo, _ := Direct(lat0, lon0, az, dist)
		_, b, _ := Inverse(la, lo, lat0, lon0)
		return LOP{Ident: "T", Station: st, Lat: la, Lon: lo, BearingDeg: angle.Wrap360(b + off), SigmaDeg: 2}
	}
	var lops []LOP
	for k := 0; k < 35; k++ {
		lops = append(lops, mk("BUSY", 20, 3000, float64(k%5-2)*0.5))
	}
	lops = append(lops, mk("BUSY", 20, 3000, 45)) // an outlier
	lops = append(lops, mk("B", 140, 2500, 0), mk("C", 250, 2000, 0))
	f, err := SolveFix(lops, FixOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if f.Bearings[35].Used {
		t.Fatalf("outlier used")
	}
	lines, undrawn := f.Drawn()
	if len(lines) != 4 || undrawn != 0 {
		t.Fatalf("%d lines (%d undrawn), want combined BUSY, its outlier, B, C", len(lines), undrawn)
	}
	c := lines[0]
	if c.Station != "BUSY" || c.Count != 35 || math.Abs(c.SigmaDeg-2/math.Sqrt(35)) > 1e-12 {
		t.Errorf("combined line %+v, want 35 bearings with sigma 2/√35", c)
	}
	_, truth, _ := Inverse(lops[0].Lat, lops[0].Lon, lat0, lon0)
	if d := angle.Diff(angle.Wrap360(truth), c.BearingDeg); math.Abs(d) > 1e-9 { // the offsets −1…+1, seven times over, average to 0
		t.Errorf("combined bearing %v, want %v", c.BearingDeg, angle.Wrap360(truth))
	}
	if lines[1].Used || lines[1].Count != 1 || lines[2].Station != "B" || lines[3].Station != "C" {
		t.Errorf("lines %+v", lines[1:])
	}
}
