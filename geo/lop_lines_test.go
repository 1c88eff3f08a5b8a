package geo

import (
	"errors"
	"io"
	"strings"
	"testing"
	"time"
)

// readAllFrom reads every record NewBearingReader gives.
func readAllFrom(t *testing.T, in string) ([]BearingRecord, string, error) {
	t.Helper()
	br, err := NewBearingReader(strings.NewReader(in))
	if err != nil {
		return nil, "", err
	}
	var recs []BearingRecord
	for {
		r, err := br.Next()
		if err == io.EOF {
			return recs, br.Unit(), nil
		}
		if err != nil {
			return recs, br.Unit(), err
		}
		recs = append(recs, r)
	}
}

// The JSON lines of `bearing --json`: the "bearing" lines are read (the
// keys of the CSV columns, JSON booleans and numbers), "burst_bearing"
// lines and a transmitter without a bearing are skipped, anything else is
// refused with its line; a line without a position says how to get one.
func TestReadBearingLines(t *testing.T) {
	in := `{"type":"burst_bearing","index":1,"ident":"T1","bearing_deg":311.5,"sigma_deg":0.01}
{"type":"bearing","ident":"T1","station":"S1","lat":52.2424,"lon":5.8672,"alt_m":41.5,"reference":"true","declination_deg":-5,"time":"2025-01-01T00:00:02.501Z","ambiguous":true,"bearing_deg":311.53,"sigma_deg":3,"alt_bearing_deg":131.53}
{"type":"bearing","ident":"T2","reference":"true","error":"no burst of T2 gave a bearing","bearing_deg":null,"sigma_deg":null}
{"type":"bearing","ident":"T1","station":"S2","lat":52.21,"lon":5.87,"reference":"MAGNETIC","ambiguous":false,"bearing_deg":28,"sigma_deg":0.00412}
`
	recs, unit, err := readAllFrom(t, in)
	if err != nil || unit != "line" || len(recs) != 2 {
		t.Fatalf("read %d records (%s): %v", len(recs), unit, err)
	}
	a, b := recs[0], recs[1]
	if a.Station != "S1" || a.Row != 2 || a.Magnetic || !a.HasDeclination || a.DeclinationDeg != -5 || !a.Ambiguous ||
		!a.HasAltBearing || a.AltBearingDeg != 131.53 || !a.HasAltM || a.AltM != 41.5 ||
		!a.Time.Equal(time.Date(2025, 1, 1, 0, 0, 2, 501e6, time.UTC)) {
		t.Errorf("first bearing line read as %+v", a)
	}
	if b.Station != "S2" || b.Row != 4 || !b.Magnetic || b.Ambiguous || b.SigmaDeg != 0.00412 {
		t.Errorf("second bearing line read as %+v", b)
	}
	for _, c := range []struct{ in, want string }{
		{`{"type":"fix","ident":"T1"}`, `line 1, field "type": "fix"`},
		{`{"type":"bearing","ident":"T1","reference":"true","bearing_deg":1,"sigma_deg":3}`, `line 1, field "station": missing: run bearing with --station`},
		{`{"type":"bearing","ident":"T1","station":"S","lat":1,"lon":2,"reference":"m","bearing_deg":1,"sigma_deg":3}`, `line 1, field "reference": "m": want true or magnetic`},
	} {
		_, _, err := readAllFrom(t, c.in+"\n")
		var ie *InputError
		if err == nil || !errors.As(err, &ie) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v, want %q", c.in, err, c.want)
		}
	}
}

// The reference column has one grammar (angle.ParseNorth): the two words
// in any case, no abbreviation (a typo must not pick a north). The
// alternate bearing is the reciprocal or nothing, and makes the row
// ambiguous; a height is metres above the ellipsoid within -500…9000 (the
// station file's range).
func TestReadBearingsCSVReferenceAltAndHeight(t *testing.T) {
	head := "ident,station,lat,lon,bearing_deg,sigma_deg,reference,ambiguous,alt_bearing_deg,alt_m\n"
	good := head + "T,A,1,2,30,2,True,,210.2,12\nT,B,1.1,2,40,2,Magnetic,false,,\n"
	recs, err := ReadBearingsCSV(strings.NewReader(good))
	if err != nil {
		t.Fatal(err)
	}
	if !recs[0].Ambiguous || !recs[0].HasAltBearing || recs[0].AltM != 12 || recs[0].Magnetic || !recs[1].Magnetic || recs[1].Ambiguous || recs[1].HasAltM {
		t.Errorf("read %+v", recs)
	}
	for _, c := range []struct{ row, field string }{
		{"T,A,1,2,30,2,t,,,", "reference"}, {"T,A,1,2,30,2,mag,,,", "reference"}, {"T,A,1,2,30,2,grid,,,", "reference"},
		{"T,A,1,2,30,2,true,,100,", "alt_bearing_deg"}, {"T,A,1,2,30,2,true,false,210,", "alt_bearing_deg"},
		{"T,A,1,2,30,2,true,,,9500", "alt_m"}, {"T,A,1,2,30,2,true,,,NaN", "alt_m"},
	} {
		_, err := ReadBearingsCSV(strings.NewReader(head + c.row + "\n"))
		var ie *InputError
		if !errors.As(err, &ie) || ie.Field != c.field {
			t.Errorf("%s: error %v, want one naming %s", c.row, err, c.field)
		}
	}
}

// A small sigma is written to three significant figures, never as 0,
// and the written alternate and height read back.
func TestWriteBearingsCSVSmallSigmaAltHeight(t *testing.T) {
	recs := []BearingRecord{{LOP: LOP{Ident: "T", Station: "S", Lat: 1, Lon: 2, BearingDeg: 30, SigmaDeg: 0.004123, Ambiguous: true},
		AltBearingDeg: 210, HasAltBearing: true, AltM: 41.25, HasAltM: true}}
	var b strings.Builder
	if err := WriteBearingsCSV(&b, recs); err != nil {
		t.Fatal(err)
	}
	got, err := ReadBearingsCSV(strings.NewReader(b.String()))
	if err != nil {
		t.Fatalf("%v\n%s", err, b.String())
	}
	if g := got[0]; g.SigmaDeg != 0.00412 || !g.HasAltBearing || g.AltBearingDeg != 210 || !g.HasAltM || g.AltM != 41.3 && g.AltM != 41.2 {
		t.Errorf("wrote %+v, read %+v\n%s", recs[0], g, b.String())
	}
}
