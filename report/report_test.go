package report

import (
	"bytes"
	"encoding/base64"
	"html"
	"image"
	"image/color"
	"image/png"
	"math"
	"regexp"
	"strings"
	"testing"
	"time"

	"nullseek/geo"
)

// testPNG encodes a w×h picture with a diagonal, for an image of known size.
func testPNG(t testing.TB, w, h int) []byte {
	t.Helper()
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			c := color.RGBA{240, 240, 250, 255}
			if x*h/w == y || x == 0 || y == 0 || x == w-1 || y == h-1 {
				c = color.RGBA{20, 60, 160, 255}
			}
			img.Set(x, y, c)
		}
	}
	var b bytes.Buffer
	if err := png.Encode(&b, img); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

const testSVG = `<?xml version="1.0" encoding="UTF-8"?>
<svg xmlns="http://www.w3.org/2000/svg" width="320" height="240" viewBox="0 0 320 240">
<rect width="320" height="240" fill="#eef"/><circle cx="160" cy="120" r="100" fill="none" stroke="#135" stroke-width="3"/>
</svg>`

// hostile is a station name and identifiers as a file could carry them.
const (
	hostileStation = `<script>alert("st")</script>`
	hostileIdent   = `"><img src=x onerror=alert(1)>&amp;`
)

// scene is a small session: three stations, two transmitters, one of them
// fixed, one refused, a schedule, a map and polar plots (numbers are
// arbitrary inputs; the tests check they come out, not that they are right).
func scene(t testing.TB) Report {
	t0 := time.Date(2026, 3, 14, 9, 26, 53, 0, time.UTC)
	alt := 301.5
	return Report{
		Title:     "Test session",
		Generated: t0.Add(time.Hour),
		Notes:     []string{"A test scene."},
		Stations: []Station{
			{Name: "alpha", Lat: 47.123456, Lon: 8.654321, Recording: "alpha.sigmf-data", Antenna: "yagi", HeadingSource: "headings-alpha.csv",
				Start: t0, End: t0.Add(180 * time.Second), Bursts: 7},
			{Name: hostileStation, Lat: 47.2, Lon: 8.7, Recording: "b.cu8", Antenna: "loop", HeadingSource: "NMEA HDT on /dev/ttyUSB0"},
			{Name: "gamma", Lat: math.NaN(), Lon: 8.8},
		},
		Transmitters: []Transmitter{{Ident: "TX/1", Bursts: 9, Note: "fixed"}, {Ident: hostileIdent, Bursts: 2}},
		Bearings: []Bearing{
			{Ident: "TX/1", Station: "alpha", BearingDeg: 123.456, SigmaDeg: 3.04, Reference: "true", BurstsUsed: 4, First: t0.Add(10 * time.Second), Last: t0.Add(145 * time.Second)},
			{Ident: "TX/1", Station: hostileStation, BearingDeg: 121.5, SigmaDeg: 4, AltBearingDeg: &alt, Reference: "magnetic, declination 2.10° E (WMM2025)", BurstsUsed: 3},
			{Ident: hostileIdent, Station: "gamma", BearingDeg: math.NaN(), SigmaDeg: math.Inf(1)},
		},
		Schedule: &Schedule{From: "alpha", Order: []string{"TX/1", hostileIdent}, CommonPeriodS: 45, DriftReference: "nominal 45 s",
			CaptureStart: t0, Rows: []ScheduleRow{
				{Ident: "TX/1", Bursts: 4, PeriodS: 45.0036, PeriodSigmaS: 0.0004, OnS: 12, GapS: 2.99, DriftPPM: 79.7, DriftSigmaPPM: 9.6,
					NextOn: t0.Add(190 * time.Second), NextOnS: 190, NextOnSigmaS: 0.012},
				{Ident: hostileIdent, Bursts: 1, PeriodS: math.NaN(), PeriodSigmaS: math.NaN(), OnS: 12, GapS: math.NaN(),
					DriftPPM: math.NaN(), DriftSigmaPPM: math.NaN(), NextOnS: math.NaN(), NextOnSigmaS: math.NaN(), Reason: "one burst: no period"},
			},
			Collisions: []Collision{{A: "TX/1", B: hostileIdent, At: t0.Add(5 * time.Hour), AtS: 18000, SigmaS: 1634, Significant: true}},
		},
		Fixes: []Fix{{Ident: "TX/1", Lat: 47.1765432, Lon: 8.7123456, Maidenhead: "JN47qe12", GridCell: "C7",
			Grid:        "origin=47.2,8.6 cell=500 rotation=0 cols=A-L rows=1-9 rowdir=down",
			Probability: 0.95, SemiMajorM: 842.4, SemiMinorM: 289.4, OrientationDeg: 143.2, Stations: 2, BearingsUsed: 2, CrossingDeg: 61.9,
			Cells:    []geo.CellProb{{Cell: "C7", Probability: 0.51}, {Cell: "D7", Probability: 0.17}, {Cell: "C8", Probability: 0.15}, {Cell: "D8", Probability: 0.1}},
			Warnings: []string{"only two stations: no check of the crossing"}}},
		Refusals: []Refusal{{Ident: hostileIdent, Reason: "one station only"}},
		Maps:     []Image{{Caption: "Map of the fixes", Data: testPNG(t, 600, 400)}},
		Polars: []Image{{Caption: "alpha: TX/1", Data: testPNG(t, 300, 300)},
			{Caption: hostileStation + ": " + hostileIdent, Data: []byte(testSVG)}},
	}
}

func render(t testing.TB, r Report) string {
	t.Helper()
	var b bytes.Buffer
	if err := Write(&b, r); err != nil {
		t.Fatal(err)
	}
	return b.String()
}

// Text from files is escaped (html/template's contextual escaping): the
// hostile station name and identifier appear as text, never as markup,
// and the page has no script at all.
func TestWriteEscapesHostileText(t *testing.T) {
	out := render(t, scene(t))
	if strings.Contains(strings.ToLower(out), "<script") {
		t.Fatal("the page contains a <script> element")
	}
	if strings.Contains(out, "<img src=x") || strings.Contains(out, "onerror=") && !strings.Contains(out, "onerror=alert(1)&gt;") {
		t.Fatal("the hostile identifier became markup")
	}
	for _, want := range []string{"&lt;script&gt;alert(&#34;st&#34;)&lt;/script&gt;", "&#34;&gt;&lt;img src=x onerror=alert(1)&gt;&amp;amp;"} {
		if !strings.Contains(out, want) {
			t.Errorf("escaped text %q missing", want)
		}
	}
}

var attrURL = regexp.MustCompile(`(?i)\b(src|href|action|srcset|poster|data)\s*=\s*"([^"]*)"`)

// Everything the page shows is inside it: every src/href is a data: URI
// (RFC 2397) of PNG or SVG that decodes to the picture given, and the
// style sheet loads nothing (no url(), no @import).
func TestWriteSelfContained(t *testing.T) {
	r := scene(t)
	out := render(t, r)
	var srcs []string
	for _, m := range attrURL.FindAllStringSubmatch(out, -1) {
		m[2] = html.UnescapeString(m[2]) // html/template writes + as &#43;
		if !strings.HasPrefix(m[2], "data:image/png;base64,") && !strings.HasPrefix(m[2], "data:image/svg+xml;base64,") {
			t.Errorf("%s=%q is not an embedded image", m[1], m[2])
			continue
		}
		srcs = append(srcs, m[2])
	}
	if strings.Contains(out, "url(") || strings.Contains(out, "@import") {
		t.Error("the style sheet refers to something outside the page")
	}
	all := append(append([]Image{}, r.Maps...), r.Polars...)
	if len(srcs) != len(all) {
		t.Fatalf("%d embedded images, want %d", len(srcs), len(all))
	}
	for i, s := range srcs {
		data, err := base64.StdEncoding.DecodeString(s[strings.Index(s, ",")+1:])
		if err != nil {
			t.Fatalf("image %d: %v", i, err)
		}
		if !bytes.Equal(data, all[i].Data) {
			t.Fatalf("image %d (%s) is not the bytes given", i, all[i].Caption)
		}
		if strings.HasPrefix(s, "data:image/png") {
			// Go's image/png decoder (standard library) reads it back.
			cfg, err := png.DecodeConfig(bytes.NewReader(data))
			if err != nil || cfg.Width == 0 {
				t.Fatalf("image %d does not decode as PNG: %v", i, err)
			}
		}
	}
}

// A picture that is neither PNG nor SVG is refused with its caption, and
// nothing is written.
func TestWriteRefusesUnknownImage(t *testing.T) {
	r := scene(t)
	r.Polars = append(r.Polars, Image{Caption: "gamma: TX/1", Data: []byte("\xff\xd8\xff\xe0 a JPEG")})
	var b bytes.Buffer
	err := Write(&b, r)
	if err == nil || !strings.Contains(err.Error(), "gamma: TX/1") || !strings.Contains(err.Error(), "neither PNG nor SVG") {
		t.Fatalf("error %v", err)
	}
	if b.Len() != 0 {
		t.Fatalf("%d bytes written after the error", b.Len())
	}
	r.Polars = []Image{{Data: nil}}
	if err := Write(&b, r); err == nil || !strings.Contains(err.Error(), "image 1: empty image") {
		t.Fatalf("empty image: %v", err)
	}
}

// Numbers that could not be estimated show as "—" (never NaN or +Inf),
// missing provenance as "not recorded", and the stated conventions and
// units are on the page.
func TestWriteMissingValuesAndConventions(t *testing.T) {
	out := html.UnescapeString(render(t, scene(t)))
	for _, bad := range []string{"NaN", "Inf", "%!"} {
		if strings.Contains(out, bad) {
			t.Errorf("page contains %q", bad)
		}
	}
	for _, want := range []string{"—", "not recorded", "Times</b> are UTC", "clockwise from <b>true north</b>",
		"Semi-major axis (m)", "Long axis (° true)", "Bearing (°)", "σ (°)", "(UTC)", "WGS 84",
		"2026-03-14 09:27:03 – 09:29:18", "842", "289", "C7 51, D7 17, C8 15", "301.5", "+79.7"} {
		if !strings.Contains(out, want) {
			t.Errorf("page lacks %q", want)
		}
	}
	if strings.Contains(out, "D8 10") {
		t.Errorf("more than %d cells listed", MaxCells)
	}
	if !strings.Contains(render(t, Report{}), DefaultTitle) {
		t.Error("an empty report has no title")
	}
}
