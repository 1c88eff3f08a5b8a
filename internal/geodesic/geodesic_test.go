package geodesic

import (
	"bufio"
	"fmt"
	"math"
	"math/rand"
	"nullseek/internal/angle"
	"nullseek/internal/testtool"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// readRows reads whitespace-separated rows, skipping # comments. Each row is
// returned both as text fields and parsed numbers.
func readRows(t *testing.T, path string) (fields [][]string, nums [][]float64) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatalf("open fixture: %v", err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		line := strings.TrimSpace(sc.Text())
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		fs := strings.Fields(line)
		row := make([]float64, len(fs))
		for i, s := range fs {
			v, err := strconv.ParseFloat(s, 64)
			if err != nil {
				t.Fatalf("%s: %q: %v", path, line, err)
			}
			row[i] = v
		}
		fields = append(fields, fs)
		nums = append(nums, row)
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return fields, nums
}

// runTool feeds lines to a program and returns its output lines, one per input.
func runTool(t *testing.T, in []string, prog string, args ...string) []string {
	t.Helper()
	out := testtool.Run(t, strings.Join(in, "\n")+"\n", prog, args...)
	lines := strings.Split(strings.TrimRight(out, "\n"), "\n")
	if len(lines) != len(in) {
		t.Fatalf("%s: %d output lines for %d inputs", prog, len(lines), len(in))
	}
	return lines
}

// angErr is |a − b| in degrees round the circle (internal/angle).
func angErr(a, b float64) float64 { return math.Abs(angle.Diff(a, b)) }

// TestInverseGeodSolve compares Inverse with GeographicLib's GeodSolve 2.1.2
// ("GeodSolve -i -p 9", Debian geographiclib-tools) on the 550 pairs of
// testdata/geo/geodsolve_inverse.txt (uniform, nearly antipodal, polar,
// equatorial, meridional, 1 mm–10 km and coincident; made by gen_geodsolve.py).
// GeodSolve is run live when installed; otherwise its committed output is used.
func TestInverseGeodSolve(t *testing.T) {
	fields, rows := readRows(t, filepath.Join("..", "..", "testdata", "geo", "geodsolve_inverse.txt"))
	if len(rows) < 500 {
		t.Fatalf("only %d reference rows", len(rows))
	}
	if testtool.Have(t, "GeodSolve") {
		in := make([]string, len(fields))
		for i, f := range fields {
			in[i] = strings.Join(f[:4], " ")
		}
		out := runTool(t, in, "GeodSolve", "-i", "-p", "9")
		for i, o := range out {
			v := testtool.ParseFloats(t, o)
			if len(v) != 3 {
				t.Fatalf("GeodSolve line %d: %q", i, o)
			}
			copy(rows[i][4:], v)
		}
		t.Log("expected values from live GeodSolve -i -p 9")
	} else {
		testtool.Have(t, "GeodSolve") // fails under NULLSEEK_REQUIRE_TOOLS=1
		t.Log("GeodSolve not installed; using its committed output")
	}
	var maxDS, maxDA, maxDAShort float64
	for i, r := range rows {
		s12, azi1, azi2 := Inverse(r[0], r[1], r[2], r[3])
		ds := math.Abs(s12 - r[6])
		da := math.Max(angErr(azi1, r[4]), angErr(azi2, r[5]))
		maxDS = math.Max(maxDS, ds)
		// Requirement: distance to 1 mm, azimuths to 1e-6°. GeodSolve's decimal
		// reader rounds some 17-digit inputs one ulp (≈1e-9 m) differently from
		// Go's (checked on row 464: moving lat2 by one ulp reproduces GeodSolve's
		// azimuth to 1e-14°), which turns a 4 mm line by up to 1e-5°. So for
		// lines under 10 m the azimuth tolerance is a 10 nm sideways offset.
		tolAzi := math.Max(1e-6, 1e-8/r[6]/radPerDeg)
		if tolAzi == 1e-6 {
			maxDA = math.Max(maxDA, da)
		} else {
			maxDAShort = math.Max(maxDAShort, da*radPerDeg*r[6])
		}
		if ds > 1e-3 || da > tolAzi || math.IsNaN(ds+da) {
			t.Errorf("row %d %v: got s12 %.9f azi1 %.12f azi2 %.12f, GeodSolve %.9f %.12f %.12f",
				i, r[:4], s12, azi1, azi2, r[6], r[4], r[5])
		}
	}
	t.Logf("inverse vs GeodSolve, %d pairs: max |Δs12| = %.3g m, max |Δazi| = %.3g° (lines ≥ 10 m), "+
		"max sideways azimuth error %.3g m (lines < 10 m)", len(rows), maxDS, maxDA, maxDAShort)
}

// TestDirectGeodSolve compares Direct with "GeodSolve -p 9" (GeographicLib 2.1.2)
// on the 300 lines of testdata/geo/geodsolve_direct.txt (1 mm to 40 000 km,
// negative distances, starts at the poles).
func TestDirectGeodSolve(t *testing.T) {
	fields, rows := readRows(t, filepath.Join("..", "..", "testdata", "geo", "geodsolve_direct.txt"))
	if len(rows) < 300 {
		t.Fatalf("only %d reference rows", len(rows))
	}
	if testtool.Have(t, "GeodSolve") {
		in := make([]string, len(fields))
		for i, f := range fields {
			in[i] = strings.Join(f[:4], " ")
		}
		out := runTool(t, in, "GeodSolve", "-p", "9")
		for i, o := range out {
			v := testtool.ParseFloats(t, o)
			if len(v) != 3 {
				t.Fatalf("GeodSolve line %d: %q", i, o)
			}
			copy(rows[i][4:], v)
		}
	} else {
		testtool.Have(t, "GeodSolve")
		t.Log("GeodSolve not installed; using its committed output")
	}
	var maxDP, maxDA float64
	for i, r := range rows {
		lat2, lon2, azi2 := Direct(r[0], r[1], r[2], r[3])
		// Position difference in metres (1° ≈ 111.32 km is ample for a mm check).
		dn := (lat2 - r[4]) * 111320
		de := angErr(lon2, r[5]) * 111320 * math.Cos(r[4]*radPerDeg)
		dp := math.Hypot(dn, de)
		da := angErr(azi2, r[6])
		if math.Abs(r[4]) > 89.9999 {
			da = 0 // azimuth at a pole depends on the longitude convention there
		}
		maxDP = math.Max(maxDP, dp)
		maxDA = math.Max(maxDA, da)
		if dp > 1e-3 || da > 1e-6 || math.IsNaN(dp+da) {
			t.Errorf("row %d %v: got %.12f %.12f %.12f, GeodSolve %.12f %.12f %.12f",
				i, r[:4], lat2, lon2, azi2, r[4], r[5], r[6])
		}
	}
	t.Logf("direct vs GeodSolve, %d lines: max position error %.3g m, max |Δazi2| = %.3g°", len(rows), maxDP, maxDA)
}

// karneyCases are the 20 test geodesics of GeographicLib's test suite
// (geographiclib-c tests/geodtest.c "testcases", also tests/geodtest.cpp; WGS84):
// lat1 lon1 azi1 lat2 lon2 azi2 s12. lon2 is "unrolled" (may exceed 180).
var karneyCases = [][7]float64{
	{35.60777, -139.44815, 111.098748429560326, -11.17491, -69.95921, 129.289270889708762, 8935244.5604818305},
	{55.52454, 106.05087, 22.020059880982801, 77.03196, 197.18234, 109.112041110671519, 4105086.1713924406},
	{-21.97856, 142.59065, -32.44456876433189, 41.84138, 98.56635, -41.84359951440466, 8394328.894657671},
	{-66.99028, 112.2363, 173.73491240878403, -12.70631, 285.90344, 2.512956620913668, 11150344.2312080241},
	{-17.42761, 173.34268, -159.033557661192928, -15.84784, 5.93557, -20.787484651536988, 16076603.1631180673},
	{32.84994, 48.28919, 150.492927788121982, -56.28556, 202.29132, 48.113449399816759, 16727068.9438164461},
	{6.96833, 52.74123, 92.581585386317712, -7.39675, 206.17291, 90.721692165923907, 17102477.2496958388},
	{-50.56724, -16.30485, -105.439679907590164, -33.56571, -94.97412, -47.348547835650331, 6455670.5118668696},
	{-58.93002, -8.90775, 140.965397902500679, -8.91104, 133.13503, 19.255429433416599, 11756066.0219864627},
	{-68.82867, -74.28391, 93.774347763114881, -50.63005, -8.36685, 34.65564085411343, 3956936.926063544},
	{-10.62672, -32.0898, -86.426713286747751, 5.883, -134.31681, -80.473780971034875, 11470869.3864563009},
	{-21.76221, 166.90563, 29.319421206936428, 48.72884, 213.97627, 43.508671946410168, 9098627.3986554915},
	{-19.79938, -174.47484, 71.167275780171533, -11.99349, -154.35109, 65.589099775199228, 2319004.8601169389},
	{-11.95887, -116.94513, 92.712619830452549, 4.57352, 7.16501, 78.64960934409585, 13834722.5801401374},
	{-87.85331, 85.66836, -65.120313040242748, 66.48646, 16.09921, -4.888658719272296, 17286615.3147144645},
	{1.74708, 128.32011, -101.584843631173858, -11.16617, 11.87109, -86.325793296437476, 12942901.1241347408},
	{-25.72959, -144.90758, -153.647468693117198, -57.70581, -269.17879, -48.343983158876487, 9413446.7452453107},
	{-41.22777, 122.32875, 14.285113402275739, -7.57291, 130.37946, 10.805303085187369, 3812686.035106021},
	{11.01307, 138.25278, 79.43682622782374, 6.62726, 247.05981, 103.708090215522657, 11911190.819018408},
	{-29.47124, 95.14681, -163.779130441688382, -27.46601, -69.15955, -15.909335945554969, 13487015.8381145492},
}

// TestKarneyCases checks inverse and direct on GeographicLib's own test set with
// its own tolerances (geodtest.c: azimuths 1e-13°, s12 1e-8 m, positions 1e-13°).
func TestKarneyCases(t *testing.T) {
	for i, c := range karneyCases {
		s12, azi1, azi2 := Inverse(c[0], c[1], c[3], c[4])
		if angErr(azi1, c[2]) > 1e-13 || angErr(azi2, c[5]) > 1e-13 || math.Abs(s12-c[6]) > 1e-8 {
			t.Errorf("inverse case %d: got %.15f %.15f %.10f want %.15f %.15f %.10f",
				i, azi1, azi2, s12, c[2], c[5], c[6])
		}
		lat2, lon2, az2 := Direct(c[0], c[1], c[2], c[6])
		if math.Abs(lat2-c[3]) > 1e-13 || angErr(lon2, c[4]) > 1e-13 || angErr(az2, c[5]) > 1e-13 {
			t.Errorf("direct case %d: got %.15f %.15f %.15f want %.15f %.15f %.15f",
				i, lat2, lon2, az2, c[3], c[4], c[5])
		}
		if lon2 < -180 || lon2 > 180 {
			t.Errorf("direct case %d: lon2 %g not reduced to [-180, 180]", i, lon2)
		}
	}
}

// TestGeodesicWorkedExamples: published worked examples and regression lines.
func TestGeodesicWorkedExamples(t *testing.T) {
	dms := func(d, m, s float64) float64 { return math.Copysign(math.Abs(d)+m/60+s/3600, d) }
	type inv struct {
		src                         string
		e                           Ellipsoid
		lat1, lon1, lat2, lon2      float64
		azi1, azi2, s12             float64 // NaN = not checked
		tolAzi, tolS                float64
		backAzi                     bool // azi2 given as back azimuth in [0,360)
		azi1Normalised360, wantNaNs bool
	}
	nan := math.NaN()
	cases := []inv{
		// Geoscience Australia, Vincenty inverse worked example (GRS80),
		// ga.gov.au/geodesy/datums/vincenty_inverse.jsp:
		// s = 54972.271 m, α12 = 306°52′05.37″, α21 = 127°10′25.07″ (back azimuth).
		{src: "Geoscience Australia Flinders Peak→Buninyong (GRS80)", e: GRS80,
			lat1: dms(-37, 57, 3.72030), lon1: dms(144, 25, 29.52440),
			lat2: dms(-37, 39, 10.15610), lon2: dms(143, 55, 35.38390),
			azi1: dms(306, 52, 5.37), azi2: dms(127, 10, 25.07), s12: 54972.271,
			tolAzi: 0.006 / 3600, tolS: 0.5e-3, backAzi: true, azi1Normalised360: true},
		// [V] with GeodSolve 2.1.2 (GeographicLib, WGS84).
		{src: "Land's End→John o' Groats, GeodSolve", e: WGS84,
			lat1: 50.06632, lon1: -5.71475, lat2: 58.64402, lon2: -3.07009,
			azi1: 9.14187749, azi2: 11.29722041, s12: 969954.166, tolAzi: 0.6e-8, tolS: 0.5e-3},
		{src: "(0,0)→(0.5,179.5) near-antipodal, GeodSolve", e: WGS84,
			lat2: 0.5, lon2: 179.5, azi1: nan, azi2: nan, s12: 19936288.579, tolS: 0.5e-3},
		{src: "(0,0)→(0.5,179.7) near-antipodal (Vincenty fails), GeodSolve", e: WGS84,
			lat2: 0.5, lon2: 179.7, azi1: nan, azi2: nan, s12: 19944127.421, tolS: 0.5e-3},
		// GeodSolve(1) man page example (GeographicLib 2.1.2, man/GeodSolve.pod):
		// 003:18:29.9 177:29:09.2 15347628.
		{src: "GeodSolve.pod JFK→SIN", e: WGS84,
			lat1: dms(40, 38, 23), lon1: -dms(73, 46, 44), lat2: dms(1, 21, 33), lon2: dms(103, 59, 22),
			azi1: dms(3, 18, 29.9), azi2: dms(177, 29, 9.2), s12: 15347628, tolAzi: 0.051 / 3600, tolS: 0.5},
		// GeographicLib tests/geodtest.c regression lines (WGS84).
		{src: "geodtest.c GeodSolve0", e: WGS84, lat1: 40.6, lon1: -73.8, lat2: 49.01666667, lon2: 2.55,
			azi1: 53.47022, azi2: 111.59367, s12: 5853226, tolAzi: 0.5e-5, tolS: 0.5},
		{src: "geodtest.c GeodSolve4 (short line)", e: WGS84, lat1: 36.493349428792, lat2: 36.49334942879201, lon2: .0000008,
			azi1: nan, azi2: nan, s12: 0.072, tolS: 0.5e-3},
		{src: "geodtest.c GeodSolve6a", e: WGS84, lat1: 88.202499451857, lat2: -88.202499451857, lon2: 179.981022032992859592,
			azi1: nan, azi2: nan, s12: 20003898.214, tolS: 0.5e-3},
		{src: "geodtest.c GeodSolve6b", e: WGS84, lat1: 89.262080389218, lat2: -89.262080389218, lon2: 179.992207982775375662,
			azi1: nan, azi2: nan, s12: 20003925.854, tolS: 0.5e-3},
		{src: "geodtest.c GeodSolve6c", e: WGS84, lat1: 89.333123580033, lat2: -89.333123580032997687, lon2: 179.99295812360148422,
			azi1: nan, azi2: nan, s12: 20003926.881, tolS: 0.5e-3},
		{src: "geodtest.c GeodSolve9", e: WGS84, lat1: 56.320923501171, lat2: -56.320923501171, lon2: 179.664747671772880215,
			azi1: nan, azi2: nan, s12: 19993558.287, tolS: 0.5e-3},
		{src: "geodtest.c GeodSolve10", e: WGS84, lat1: 52.784459512564, lat2: -52.784459512563990912, lon2: 179.634407464943777557,
			azi1: nan, azi2: nan, s12: 19991596.095, tolS: 0.5e-3},
		{src: "geodtest.c GeodSolve11", e: WGS84, lat1: 48.522876735459, lat2: -48.52287673545898293, lon2: 179.599720456223079643,
			azi1: nan, azi2: nan, s12: 19989144.774, tolS: 0.5e-3},
		{src: "geodtest.c GeodSolve33a (equatorial)", e: WGS84, lon2: 179, azi1: 90, azi2: 90, s12: 19926189, tolAzi: 0.5e-5, tolS: 0.5},
		{src: "geodtest.c GeodSolve33b", e: WGS84, lon2: 179.5, azi1: 55.96650, azi2: 124.03350, s12: 19980862, tolAzi: 0.5e-5, tolS: 0.5},
		{src: "geodtest.c GeodSolve33c (antipodal on equator)", e: WGS84, lon2: 180, azi1: 0, azi2: 180, s12: 20003931, tolAzi: 0.5e-5, tolS: 0.5},
		{src: "geodtest.c GeodSolve33d", e: WGS84, lat2: 1, lon2: 180, azi1: 0, azi2: 180, s12: 19893357, tolAzi: 0.5e-5, tolS: 0.5},
		{src: "geodtest.c GeodSolve59", e: WGS84, lat1: 5, lon1: 0.00000000000001, lat2: 10, lon2: 180,
			azi1: 0.000000000000035, azi2: 179.99999999999996, s12: 18345191.174332713, tolAzi: 1.5e-14, tolS: 5e-9},
		{src: "geodtest.c GeodSolve76 Wellington→Salamanca (Vincenty fails)", e: WGS84,
			lat1: -(41 + 19/60.0), lon1: 174 + 49/60.0, lat2: 40 + 58/60.0, lon2: -(5 + 30/60.0),
			azi1: 160.39137649664, azi2: 19.50042925176, s12: 19960543.857179, tolAzi: 0.5e-11, tolS: 0.5e-6},
		{src: "geodtest.c GeodSolve78 (NGS calculator fails)", e: WGS84, lat1: 27.2, lat2: -27.1, lon2: 179.5,
			azi1: 45.82468716758, azi2: 134.22776532670, s12: 19974354.765767, tolAzi: 0.5e-11, tolS: 0.5e-6},
		{src: "geodtest.c GeodSolve80 (coincident)", e: WGS84, lat1: 20.001, lat2: 20.001,
			azi1: 180, azi2: 180, s12: 0, tolAzi: 1e-13, tolS: 1e-8},
		{src: "geodtest.c GeodSolve80 (pole to pole, same point)", e: WGS84, lat1: 90, lat2: 90, lon2: 180,
			azi1: 0, azi2: 180, s12: 0, tolAzi: 1e-13, tolS: 1e-8},
		{src: "geodtest.c GeodSolve92 (hypot accuracy)", e: WGS84, lat1: 37.757540000000006, lon1: -122.47018,
			lat2: 37.75754, lon2: -122.470177, azi1: 89.99999923, azi2: 90.00000106, s12: 0.264, tolAzi: 1e-7, tolS: 0.5e-3},
		{src: "geodtest.c GeodSolve14 (lon2 NaN)", e: WGS84, lat2: 1, lon2: nan, wantNaNs: true},
		{src: "geodtest.c GeodSolve55 (lat1 NaN)", e: WGS84, lat1: nan, lon2: 90, wantNaNs: true},
		{src: "latitude beyond 90 (GeographicLib LatFix)", e: WGS84, lat1: 91, lon2: 90, wantNaNs: true},
	}
	for _, c := range cases {
		s12, azi1, azi2 := c.e.Inverse(c.lat1, c.lon1, c.lat2, c.lon2)
		if c.wantNaNs {
			if !math.IsNaN(s12) || !math.IsNaN(azi1) || !math.IsNaN(azi2) {
				t.Errorf("%s: got %v %v %v, want NaNs", c.src, s12, azi1, azi2)
			}
			continue
		}
		if math.Abs(s12-c.s12) > c.tolS {
			t.Errorf("%s: s12 = %.9f, want %.9f ± %g", c.src, s12, c.s12, c.tolS)
		}
		if c.backAzi {
			azi2 = angle.Wrap360(azi2 + 180)
		}
		if c.azi1Normalised360 {
			azi1 = angle.Wrap360(azi1)
		}
		if !math.IsNaN(c.azi1) && angErr(azi1, c.azi1) > c.tolAzi {
			t.Errorf("%s: azi1 = %.12f, want %.12f ± %g", c.src, azi1, c.azi1, c.tolAzi)
		}
		if !math.IsNaN(c.azi2) && angErr(azi2, c.azi2) > c.tolAzi {
			t.Errorf("%s: azi2 = %.12f, want %.12f ± %g", c.src, azi2, c.azi2, c.tolAzi)
		}
	}
	// Zero length gives +0, not −0 (geodtest.c GeodSolve80).
	if s, _, _ := Inverse(20.001, 0, 20.001, 0); math.Signbit(s) {
		t.Error("coincident points: s12 is -0")
	}
}

// TestDirectWorkedExamples: direct-problem lines of GeographicLib's geodtest.c.
func TestDirectWorkedExamples(t *testing.T) {
	nan := math.NaN()
	cases := []struct {
		src                    string
		lat1, lon1, azi1, s12  float64
		lat2, lon2, azi2, tol  float64
		wantNaNLat, wantNaNLon bool
	}{
		{src: "GeodSolve1", lat1: 40.63972222, lon1: -73.77888889, azi1: 53.5, s12: 5850e3,
			lat2: 49.01467, lon2: 2.56106, azi2: 111.62947, tol: 0.5e-5},
		{src: "GeodSolve5 (to the pole)", lat1: 0.01777745589997, lon1: 30, azi1: 0, s12: 10e6,
			lat2: 90, lon2: nan, azi2: nan, tol: 0.5e-5},
		{src: "GeodSolve17 (no unroll)", lat1: 40, lon1: -75, azi1: -10, s12: 2e7,
			lat2: -39, lon2: 105, azi2: -170, tol: 1},
		{src: "GeodSolve61 (tiny negative azimuth goes west)", lat1: 45, azi1: -0.000000000000000003, s12: 1e7,
			lat2: 45.30632, lon2: -180, azi2: 180, tol: 0.5e-5},
		{src: "GeodSolve73 (backwards from the pole)", lat1: 90, lon1: 10, azi1: 180, s12: -1e6,
			lat2: 81.04623, lon2: -170, azi2: 0, tol: 0.5e-5},
		{src: "GeodSolve84 (infinite distance)", azi1: 90, s12: math.Inf(1), wantNaNLat: true, wantNaNLon: true},
		{src: "GeodSolve84 (NaN distance)", azi1: 90, s12: nan, wantNaNLat: true, wantNaNLon: true},
		{src: "GeodSolve84 (NaN azimuth)", azi1: nan, s12: 1000, wantNaNLat: true, wantNaNLon: true},
		{src: "GeodSolve84 (infinite longitude)", lon1: math.Inf(1), azi1: 90, s12: 1000,
			lat2: 0, lon2: nan, azi2: 90, wantNaNLon: true, tol: 0},
		{src: "GeodSolve84 (NaN latitude)", lat1: nan, azi1: 90, s12: 1000, wantNaNLat: true, wantNaNLon: true},
	}
	for _, c := range cases {
		lat2, lon2, azi2 := Direct(c.lat1, c.lon1, c.azi1, c.s12)
		if c.wantNaNLat != math.IsNaN(lat2) || c.wantNaNLon != math.IsNaN(lon2) {
			t.Errorf("%s: got %v %v %v, NaN expectations lat %v lon %v", c.src, lat2, lon2, azi2, c.wantNaNLat, c.wantNaNLon)
			continue
		}
		if !c.wantNaNLat && math.Abs(lat2-c.lat2) > c.tol {
			t.Errorf("%s: lat2 = %.9f want %.9f", c.src, lat2, c.lat2)
		}
		if !c.wantNaNLon && !math.IsNaN(c.lon2) && angErr(lon2, c.lon2) > c.tol {
			t.Errorf("%s: lon2 = %.9f want %.9f", c.src, lon2, c.lon2)
		}
		if !math.IsNaN(c.azi2) && !c.wantNaNLat && angErr(azi2, c.azi2) > c.tol {
			t.Errorf("%s: azi2 = %.9f want %.9f", c.src, azi2, c.azi2)
		}
	}
	// GeodSolve73 also checks that the azimuth is +0, not −0.
	if _, _, azi2 := Direct(90, 10, 180, -1e6); azi2 != 0 || math.Signbit(azi2) {
		t.Errorf("GeodSolve73: azi2 = %v, want +0", azi2)
	}
}

// TestGeodPROJ cross-checks against PROJ's geod 9.1.1 (Debian proj-bin),
// "geod +ellps=WGS84 -I -f %.10f -F %.6f" (geod(1), PROJ 9.1.1): output az12, az21
// (back azimuth) and distance. PROJ's geod uses its own copy of geodesic.c.
func TestGeodPROJ(t *testing.T) {
	geod := testtool.Need(t, "geod")
	_, rows := readRows(t, filepath.Join("..", "..", "testdata", "geo", "geodsolve_inverse.txt"))
	var in []string
	var pick [][]float64
	for i := 0; i < len(rows); i += 25 { // a spread of 22 lines from all categories
		r := rows[i]
		in = append(in, fmt.Sprintf("%.15f %.15f %.15f %.15f", r[0], r[1], r[2], r[3]))
		pick = append(pick, r)
	}
	// Flinders Peak → Buninyong, compared on GRS80 separately below.
	out := runTool(t, in, geod, "+ellps=WGS84", "-I", "-f", "%.10f", "-F", "%.6f")
	for i, o := range out {
		v := testtool.ParseFloats(t, o)
		r := pick[i]
		s12, azi1, azi2 := Inverse(r[0], r[1], r[2], r[3])
		if s12 == 0 {
			continue // geod prints arbitrary azimuths for coincident points
		}
		// geod prints 1e-10° and 1e-6 m; its input parser, like GeodSolve's, may
		// differ by an ulp, so short lines get a 10 nm sideways tolerance.
		tolAzi := math.Max(2e-10, 1e-8/s12/radPerDeg)
		if math.Abs(s12-v[2]) > 2e-6 || angErr(azi1, v[0]) > tolAzi || angErr(angle.Wrap360(azi2+180), v[1]) > tolAzi {
			t.Errorf("geod line %q: got %.10f %.10f %.6f, geod %q", in[i], azi1, angle.Wrap360(azi2+180), s12, o)
		}
	}
	// [V] PROJ 9.1.1: geod +ellps=GRS80 -I -f "%.8f" -F "%.4f" on Flinders→Buninyong.
	out = runTool(t, []string{"-37.950922305555556 144.42486788888889 -37.652821138888889 143.92649552777778"},
		geod, "+ellps=GRS80", "-I", "-f", "%.8f", "-F", "%.4f")
	v := testtool.ParseFloats(t, out[0])
	s12, azi1, azi2 := GRS80.Inverse(-37.950922305555556, 144.42486788888889, -37.652821138888889, 143.92649552777778)
	if math.Abs(s12-v[2]) > 1e-4 || angErr(azi1, v[0]) > 1e-8 || angErr(angle.Wrap360(azi2+180), v[1]) > 1e-8 {
		t.Errorf("GRS80 Flinders→Buninyong: got %.8f %.8f %.4f, geod %q", azi1, angle.Wrap360(azi2+180), s12, out[0])
	}
}

// TestENURoundTrip checks FromENU(ENU(p)) = p and ENU(FromENU(e, n)) = (e, n) to
// 1e-6 m over 1 m … 2000 km, including high latitudes (common practice: an
// inverse pair must round-trip).
func TestENURoundTrip(t *testing.T) {
	rng := rand.New(rand.NewSource(7))
	var worst float64
	for i := 0; i < 2000; i++ {
		lat0 := rng.Float64()*178 - 89
		lon0 := rng.Float64()*360 - 180
		dist := math.Pow(10, rng.Float64()*6.3)
		az := rng.Float64() * 2 * math.Pi
		e, n := dist*math.Sin(az), dist*math.Cos(az)
		lat, lon := FromENU(lat0, lon0, e, n)
		e2, n2 := ENU(lat0, lon0, lat, lon)
		if d := math.Hypot(e2-e, n2-n); d > 1e-6 || math.IsNaN(d) {
			t.Fatalf("ENU(FromENU(%g, %g)) at (%g, %g) = (%g, %g), off by %g m", e, n, lat0, lon0, e2, n2, d)
		} else {
			worst = math.Max(worst, d)
		}
		lat3, lon3 := FromENU(lat0, lon0, e2, n2)
		if d, _, _ := Inverse(lat, lon, lat3, lon3); d > 1e-6 {
			t.Fatalf("FromENU(ENU(p)) moved p by %g m", d)
		}
	}
	t.Logf("ENU round trip: worst %.3g m", worst)
	if lat, lon := FromENU(12, 34, 0, 0); lat != 12 || lon != 34 {
		t.Errorf("zero offset moved the origin to (%v, %v)", lat, lon)
	}
	if e, n := ENU(12, 34, 12, 34); e != 0 || n != 0 {
		t.Errorf("ENU of the origin = (%v, %v)", e, n)
	}
}

// TestENUProjAeqd compares ENU with PROJ 9.1.1's ellipsoidal azimuthal
// equidistant projection: "proj +proj=aeqd +lat_0=φ0 +lon_0=λ0 +ellps=WGS84 -f %.6f"
// (input lon lat, output x y metres), which is the same construction.
func TestENUProjAeqd(t *testing.T) {
	proj := testtool.Need(t, "proj")
	rng := rand.New(rand.NewSource(11))
	for i := 0; i < 20; i++ {
		lat0 := rng.Float64()*160 - 80
		lon0 := rng.Float64()*360 - 180
		lat := lat0 + rng.Float64()*10 - 5
		lon := lon0 + rng.Float64()*10 - 5
		lat = math.Max(-89, math.Min(89, lat))
		out := runTool(t, []string{fmt.Sprintf("%.12f %.12f", lon, lat)}, proj,
			"+proj=aeqd", fmt.Sprintf("+lat_0=%.12f", lat0), fmt.Sprintf("+lon_0=%.12f", lon0),
			"+ellps=WGS84", "-f", "%.6f")
		v := testtool.ParseFloats(t, out[0])
		e, n := ENU(lat0, lon0, lat, lon)
		if math.Abs(e-v[0]) > 2e-6 || math.Abs(n-v[1]) > 2e-6 {
			t.Errorf("ENU(%g,%g → %g,%g) = (%.6f, %.6f), proj aeqd %q", lat0, lon0, lat, lon, e, n, out[0])
		}
	}
}

func TestNewEllipsoidErrors(t *testing.T) {
	for _, c := range []struct{ a, f float64 }{{0, 0.003}, {-1, 0.003}, {math.Inf(1), 0}, {math.NaN(), 0},
		{6378137, -0.001}, {6378137, 0.5}, {6378137, math.NaN()}} {
		if _, err := NewEllipsoid(c.a, c.f); err == nil {
			t.Errorf("NewEllipsoid(%g, %g): no error", c.a, c.f)
		}
	}
	// A sphere (f = 0): s = R·Δλ along the equator (common practice).
	sph, err := NewEllipsoid(6371000, 0)
	if err != nil {
		t.Fatal(err)
	}
	if s, _, _ := sph.Inverse(0, 0, 0, 90); math.Abs(s-6371000*math.Pi/2) > 1e-6 {
		t.Errorf("sphere quarter equator = %.9f", s)
	}
	var zero Ellipsoid // behaves as WGS84
	if a, b := zero.EquatorialRadiusM(), WGS84.EquatorialRadiusM(); a != b || zero.Flattening() != WGS84.Flattening() {
		t.Error("zero Ellipsoid is not WGS84")
	}
}

func BenchmarkInverse(b *testing.B) {
	rng := rand.New(rand.NewSource(1))
	pts := make([][4]float64, 1024)
	for i := range pts {
		pts[i] = [4]float64{rng.Float64()*180 - 90, rng.Float64()*360 - 180, rng.Float64()*180 - 90, rng.Float64()*360 - 180}
	}
	b.ResetTimer()
	var sink float64
	for i := 0; i < b.N; i++ {
		p := pts[i&1023]
		s, _, _ := Inverse(p[0], p[1], p[2], p[3])
		sink += s
	}
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "solutions/s")
	_ = sink
}

func BenchmarkDirect(b *testing.B) {
	rng := rand.New(rand.NewSource(1))
	pts := make([][4]float64, 1024)
	for i := range pts {
		pts[i] = [4]float64{rng.Float64()*180 - 90, rng.Float64()*360 - 180, rng.Float64()*360 - 180, rng.Float64() * 2e7}
	}
	b.ResetTimer()
	var sink float64
	for i := 0; i < b.N; i++ {
		p := pts[i&1023]
		la, _, _ := Direct(p[0], p[1], p[2], p[3])
		sink += la
	}
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "solutions/s")
	_ = sink
}
