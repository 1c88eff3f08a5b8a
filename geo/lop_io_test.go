package geo

import (
	"errors"
	"math"
	"nullseek/internal/angle"
	"strings"
	"testing"
	"time"
)

const csvHeader = "ident,station,lat,lon,bearing_deg,sigma_deg,reference,time\n"

func TestReadBearingsCSVGood(t *testing.T) {
	in := "# comment line\n" + strings.ToUpper(csvHeader[:5]) + csvHeader[5:] +
		"T1,A,10.5,20.25,370,2,true,2025-06-01T10:00:00Z\n" +
		"T1,B,10.6,20.30,-10,3.5,magnetic,\n"
	recs, err := ReadBearingsCSV(strings.NewReader(in))
	if err != nil {
		t.Fatal(err)
	}
	if len(recs) != 2 {
		t.Fatalf("%d records", len(recs))
	}
	a, b := recs[0], recs[1]
	if a.BearingDeg != 10 || b.BearingDeg != 350 || !b.Magnetic || a.Magnetic || a.Row != 3 || b.Row != 4 {
		t.Errorf("records %+v %+v", a, b)
	}
	if !a.Time.Equal(time.Date(2025, 6, 1, 10, 0, 0, 0, time.UTC)) || !b.Time.IsZero() {
		t.Errorf("times %v %v", a.Time, b.Time)
	}
}

// Every bad input names its row and field (issue #5).
func TestReadBearingsCSVErrors(t *testing.T) {
	row := func(s string) string { return csvHeader + "T,A,1,2,30,2,true,\n" + s + "\n" }
	cases := []struct {
		name, in, want string
	}{
		{"latitude out of range", row("T,B,91,2,30,2,true,"), `row 3, field "lat"`},
		{"longitude out of range", row("T,B,1,181,30,2,true,"), `row 3, field "lon"`},
		{"bearing not a number", row("T,B,1,2,north,2,true,"), `row 3, field "bearing_deg": "north" is not a number`},
		{"bearing NaN", row("T,B,1,2,NaN,2,true,"), `row 3, field "bearing_deg"`},
		{"sigma zero", row("T,B,1,2,30,0,true,"), `row 3, field "sigma_deg"`},
		{"sigma negative", row("T,B,1,2,30,-1,true,"), `row 3, field "sigma_deg"`},
		{"bad reference", row("T,B,1,2,30,2,grid,"), `row 3, field "reference"`},
		// units.ParseNorth: the whole word only; an abbreviation must not pick a north
		{"abbreviated magnetic", row("T,B,1,2,30,2,m,"), `row 3, field "reference"`},
		{"abbreviated true", row("T,B,1,2,30,2,t,"), `row 3, field "reference"`},
		{"bad time", row("T,B,1,2,30,2,true,yesterday"), `row 3, field "time"`},
		{"empty ident", row(",B,1,2,30,2,true,"), `row 3, field "ident"`},
		{"missing column", "ident,station,lat,lon,bearing_deg,reference\nT,A,1,2,3,true\n", `row 1, field "sigma_deg": missing column`},
		{"short row", row("T,B,1,2,30"), `row 3`},
		{"station moved", row("U,A,1.01,2,30,2,true,"), `row 3, field "lat/lon": station "A" is 1106 m away from where row 2 put it`},
		{"empty", "", "row 1"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := ReadBearingsCSV(strings.NewReader(c.in))
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("error %v, want it to contain %q", err, c.want)
			}
			var ie *InputError
			if !errors.As(err, &ie) {
				t.Errorf("not an *InputError: %T", err)
			}
			if strings.Count(err.Error(), "\n") > 0 {
				t.Errorf("error is more than one line: %q", err)
			}
		})
	}
}

func TestReadBearingsJSON(t *testing.T) {
	good := `{"bearings":[{"ident":"T","station":"A","lat":1,"lon":2,"bearing_deg":30,"sigma_deg":2,"reference":"true"},
	 {"ident":"T","station":"B","lat":"1.1","lon":2,"bearing_deg":300,"sigma_deg":2,"reference":"magnetic","declination_deg":-3,"time":"2026-01-01T00:00:00Z"}]}`
	recs, err := ReadBearingsJSON(strings.NewReader(good))
	if err != nil {
		t.Fatal(err)
	}
	if len(recs) != 2 || !recs[1].HasDeclination || recs[1].DeclinationDeg != -3 || recs[1].Lat != 1.1 {
		t.Fatalf("%+v", recs)
	}
	bad := []struct{ in, want string }{
		{`[{"ident":"T","station":"A","lat":1,"lon":2,"bearing_deg":"x","sigma_deg":2,"reference":"true"}]`, `entry 1, field "bearing_deg"`},
		{`[{"ident":"T","station":"A","lat":1,"lon":2,"bearing_deg":[1],"sigma_deg":2,"reference":"true"}]`, `entry 1, field "bearing_deg"`},
		{`[{"ident":"T","station":"A","lat":1,"lon":2,"bearing_deg":1,"reference":"true"}]`, `entry 1, field "sigma_deg": missing`},
		{`[{"ident":"T","station":"A","lat":-95,"lon":2,"bearing_deg":1,"sigma_deg":1,"reference":"true"}]`, `entry 1, field "lat"`},
		{`{"bearings": 3}`, `bearings JSON`},
	}
	for _, c := range bad {
		if _, err := ReadBearingsJSON(strings.NewReader(c.in)); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v, want %q", c.in, err, c.want)
		}
	}
}

// Magnetic → true: true = magnetic + declination (WMM2025 technical report); the
// WMM2025 report table 6 gives D = 1.28° at (80°N, 0°E), 2025.0, 0 km.
func TestResolveTrue(t *testing.T) {
	mk := func(mag bool, own *float64) BearingRecord {
		r := BearingRecord{LOP: LOP{Ident: "T", Station: "A", Lat: 80, Lon: 0, BearingDeg: 100, SigmaDeg: 2,
			Time: time.Date(2025, 1, 1, 0, 0, 0, 0, time.UTC)}, Magnetic: mag}
		if own != nil {
			r.DeclinationDeg, r.HasDeclination = *own, true
		}
		return r
	}
	wmm := func(lat, lon float64, tm time.Time) (float64, error) { return Declination(lat, lon, 0, tm) }
	own, over := -7.0, 4.0
	lops, warns, err := ResolveTrue([]BearingRecord{mk(false, nil), mk(true, nil), mk(true, &own)}, nil, wmm, time.Now())
	if err != nil {
		t.Fatal(err)
	}
	if lops[0].BearingDeg != 100 || math.Abs(lops[1].BearingDeg-101.28) > 0.01 || lops[2].BearingDeg != 93 {
		t.Errorf("bearings %v %v %v", lops[0].BearingDeg, lops[1].BearingDeg, lops[2].BearingDeg)
	}
	if len(warns) != 0 {
		t.Errorf("warnings %v", warns)
	}
	lops, _, _ = ResolveTrue([]BearingRecord{mk(true, nil)}, &over, wmm, time.Now())
	if lops[0].BearingDeg != 104 {
		t.Errorf("override: %v", lops[0].BearingDeg)
	}
	// Outside 2025.0–2030.0: a warning (WMM2025 technical report: valid 2025.0–2030.0).
	r := mk(true, nil)
	r.Time = time.Date(2031, 6, 1, 0, 0, 0, 0, time.UTC)
	if _, warns, _ := ResolveTrue([]BearingRecord{r}, nil, wmm, time.Now()); len(warns) != 1 {
		t.Errorf("no validity warning for 2031: %v", warns)
	}
}

func FuzzReadBearingsCSV(f *testing.F) {
	f.Add(csvHeader + "T,A,1,2,30,2,true,2025-01-01T00:00:00Z\nT,B,1.1,2,300,2,magnetic,\n")
	f.Add("ident,station,lat,lon,bearing_deg,sigma_deg,reference,declination_deg\nT,A,1,2,3,4,m,5\n")
	f.Add("\"unterminated\n")
	f.Fuzz(func(t *testing.T, s string) {
		recs, err := ReadBearingsCSV(strings.NewReader(s))
		if err != nil {
			return
		}
		for _, r := range recs {
			if err := r.Validate(); err != nil {
				t.Fatalf("accepted an invalid record: %v", err)
			}
		}
	})
}

func FuzzReadBearingsJSON(f *testing.F) {
	f.Add(`[{"ident":"T","station":"A","lat":1,"lon":2,"bearing_deg":30,"sigma_deg":2,"reference":"true"}]`)
	f.Add(`{"bearings":[{"ident":"T"}]}`)
	f.Fuzz(func(t *testing.T, s string) {
		recs, err := ReadBearingsJSON(strings.NewReader(s))
		if err != nil {
			return
		}
		for _, r := range recs {
			if err := r.Validate(); err != nil {
				t.Fatalf("accepted an invalid record: %v", err)
			}
		}
	})
}

// Bounds on every number of a bearing row, one error naming row and field:
// latitude ±90, longitude ±180 (inclusive), 0 < sigma < 90° and finite,
// declination ±180.
func TestReadBearingsBounds(t *testing.T) {
	row := func(s string) string {
		return "ident,station,lat,lon,bearing_deg,sigma_deg,reference,time,declination_deg\nT,A,1,2,30,2,true,,\n" + s + "\n"
	}
	for _, c := range []struct{ in, want string }{
		{row("T,B,-90.0001,2,30,2,true,,"), `row 3, field "lat"`},
		{row("T,B,1,-180.5,30,2,true,,"), `row 3, field "lon"`},
		{row("T,B,1,2,30,NaN,true,,"), `row 3, field "sigma_deg"`},
		{row("T,B,1,2,30,Inf,true,,"), `row 3, field "sigma_deg"`},
		{row("T,B,1,2,30,90,true,,"), `row 3, field "sigma_deg": 90 must be less than 90 degrees`},
		{row("T,B,1,2,30,1e-400,true,,"), `row 3, field "sigma_deg"`},
		{row("T,B,1,2,Inf,2,true,,"), `row 3, field "bearing_deg"`},
		{row("T,B,1,2,30,2,magnetic,,200"), `row 3, field "declination_deg"`},
	} {
		if _, err := ReadBearingsCSV(strings.NewReader(c.in)); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q: %v, want %q", c.in[strings.LastIndex(c.in[:len(c.in)-1], "\n")+1:], err, c.want)
		}
	}
	for _, ok := range []string{row("T,B,90,180,30,2,true,,"), row("T,B,-90,-180,30,89.9,true,,")} {
		if _, err := ReadBearingsCSV(strings.NewReader(ok)); err != nil {
			t.Errorf("edge values refused: %v", err)
		}
	}
}

// JSON booleans are read where booleans are natural ("ambiguous": false).
func TestReadBearingsJSONBooleans(t *testing.T) {
	in := `[{"ident":"T","station":"A","lat":1,"lon":2,"bearing_deg":30,"sigma_deg":2,"reference":"true","ambiguous":false},
	{"ident":"T","station":"B","lat":1.1,"lon":2,"bearing_deg":300,"sigma_deg":2,"reference":"true","ambiguous":true}]`
	recs, err := ReadBearingsJSON(strings.NewReader(in))
	if err != nil {
		t.Fatal(err)
	}
	if recs[0].Ambiguous || !recs[1].Ambiguous {
		t.Errorf("ambiguous %v %v", recs[0].Ambiguous, recs[1].Ambiguous)
	}
	if _, err := ReadBearingsJSON(strings.NewReader(strings.Replace(in, `"lat":1,`, `"lat":true,`, 1))); err == nil || !strings.Contains(err.Error(), `entry 1, field "lat"`) {
		t.Errorf("boolean latitude: %v", err)
	}
}

// What WriteBearingsCSV writes, ReadBearingsCSV reads back (to the
// written precision), and repeated records are spotted as such.
func TestWriteBearingsCSVRoundTrip(t *testing.T) {
	when := time.Date(2026, 4, 2, 3, 4, 5, 0, time.UTC)
	recs := []BearingRecord{
		{LOP: LOP{Ident: "N0CALL/1", Station: "A, north", Lat: 46.1234567, Lon: -7.7654321, BearingDeg: 123.456, SigmaDeg: 2.5, Time: when, Ambiguous: true}},
		{LOP: LOP{Ident: "N0CALL/1", Station: "B", Lat: -33.5, Lon: 151.25, BearingDeg: 0.004, SigmaDeg: 1}, Magnetic: true, DeclinationDeg: -3.25, HasDeclination: true},
	}
	var b strings.Builder
	if err := WriteBearingsCSV(&b, recs); err != nil {
		t.Fatal(err)
	}
	got, err := ReadBearingsCSV(strings.NewReader(b.String()))
	if err != nil {
		t.Fatalf("%v\n%s", err, b.String())
	}
	for i, g := range got {
		w := recs[i]
		if g.Ident != w.Ident || g.Station != w.Station || math.Abs(g.Lat-w.Lat) > 5e-7 || math.Abs(g.Lon-w.Lon) > 5e-7 ||
			math.Abs(angle.Diff(g.BearingDeg, w.BearingDeg)) > 0.005 || g.SigmaDeg != w.SigmaDeg || !g.Time.Equal(w.Time) ||
			g.Ambiguous != w.Ambiguous || g.Magnetic != w.Magnetic || g.HasDeclination != w.HasDeclination || g.DeclinationDeg != w.DeclinationDeg {
			t.Errorf("record %d: wrote %+v, read %+v", i, w, g)
		}
	}
	bad := []BearingRecord{{LOP: LOP{Ident: "T", Station: "S", BearingDeg: math.NaN(), SigmaDeg: 1}}}
	if err := WriteBearingsCSV(&strings.Builder{}, bad); err == nil {
		t.Error("NaN bearing written")
	}
	var d Duplicates
	again := got[0]
	again.Row = 9
	for _, r := range []BearingRecord{got[0], got[1], again} {
		d.Seen(r)
	}
	other := again
	other.SigmaDeg = 2.6
	if dup, _ := d.Seen(other); dup || d.Count != 1 || d.First != 9 || d.FirstOf != got[0].Row {
		t.Errorf("duplicates: count %d first %d of %d", d.Count, d.First, d.FirstOf)
	}
}
