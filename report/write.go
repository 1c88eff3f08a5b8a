package report

import (
	"bytes"
	_ "embed"
	"encoding/base64"
	"fmt"
	"html/template"
	"io"
	"math"
	"strings"
	"time"
)

var nan = math.NaN()

//go:embed page.html.tmpl
var pageSource string

//go:embed style.css
var styleSource string

// DefaultTitle heads a page whose Report has no title.
const DefaultTitle = "nullseek session report"

// timeLayout is how the page writes a UTC time (ISO 8601, space between
// date and time for reading; the zone is stated in the column heading).
const timeLayout = "2006-01-02 15:04:05"

// notRecorded stands for a value the inputs did not carry (the template
// "opt" writes it too).
const notRecorded = "not recorded"

var page = template.Must(template.New("page").Funcs(template.FuncMap{
	"num":   num,
	"coord": func(x float64) string { return num(x, 5) },
	"pct":   func(p float64) string { return num(100*p, 0) },
	"utc":   utc,
	"span":  span,
	"join":  strings.Join,
	"hasNext": func(rows []ScheduleRow) bool {
		for _, r := range rows {
			if !r.NextOn.IsZero() || finite(r.NextOnS) {
				return true
			}
		}
		return false
	},
	"alt": func(p *float64) string {
		if p == nil {
			return "—"
		}
		return num(*p, 1)
	},
	"signed": func(x float64, prec int) string {
		if !finite(x) {
			return "—"
		}
		return fmt.Sprintf("%+.*f", prec, x)
	},
}).Parse(pageSource))

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// num formats x with prec decimals, "—" when not finite.
func num(x float64, prec int) string {
	if !finite(x) {
		return "—"
	}
	return fmt.Sprintf("%.*f", prec, x)
}

func utc(t time.Time) string {
	if t.IsZero() {
		return notRecorded
	}
	return t.UTC().Format(timeLayout)
}

// span writes a time span, shortening the end to the time of day when it
// falls on the start's day; "" when neither end is known.
func span(a, b time.Time) string {
	switch {
	case a.IsZero() && b.IsZero():
		return ""
	case b.IsZero() || a.Equal(b):
		return utc(a)
	case a.IsZero():
		return "until " + utc(b)
	}
	a, b = a.UTC(), b.UTC()
	if a.Format("2006-01-02") == b.Format("2006-01-02") {
		return a.Format(timeLayout) + " – " + b.Format("15:04:05")
	}
	return utc(a) + " – " + utc(b)
}

type imageView struct {
	Caption string
	Src     template.URL
}

type cellView struct {
	Cell string
	Pct  string
}

type bearingView struct {
	Bearing
	St *Station
}

type fixView struct {
	Fix
	TopCells []cellView
}

type pageView struct {
	Report
	Title       string
	Style       template.CSS
	BearingRows []bearingView
	FixRows     []fixView
	MapImages   []imageView
	PolarImages []imageView
}

// MaxCells is how many of a fix's most probable cells the page lists.
const MaxCells = 3

// Write writes r as one HTML page to w. An image that is neither PNG nor
// SVG is an error naming its caption, and nothing is written.
func Write(w io.Writer, r Report) error {
	v := pageView{Report: r, Title: r.Title, Style: template.CSS(styleSource)}
	if strings.TrimSpace(v.Title) == "" {
		v.Title = DefaultTitle
	}
	var err error
	if v.MapImages, err = images(r.Maps); err != nil {
		return err
	}
	if v.PolarImages, err = images(r.Polars); err != nil {
		return err
	}
	for i := range r.Bearings {
		b := bearingView{Bearing: r.Bearings[i]}
		for k := range r.Stations {
			if r.Stations[k].Name == b.Station {
				b.St = &r.Stations[k]
				break
			}
		}
		if b.St == nil {
			b.St = &Station{Name: b.Station, Lat: nan, Lon: nan}
		}
		v.BearingRows = append(v.BearingRows, b)
	}
	for _, f := range r.Fixes {
		fv := fixView{Fix: f}
		for i, c := range f.Cells {
			if i == MaxCells {
				break
			}
			fv.TopCells = append(fv.TopCells, cellView{c.Cell, num(100*c.Probability, 0)})
		}
		v.FixRows = append(v.FixRows, fv)
	}
	// Render whole before writing, so a template error leaves w empty.
	var buf bytes.Buffer
	if err := page.Execute(&buf, v); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	_, err = buf.WriteTo(w)
	return err
}

func images(in []Image) ([]imageView, error) {
	var out []imageView
	for i, im := range in {
		mime, err := ImageType(im.Data)
		if err != nil {
			name := im.Caption
			if name == "" {
				name = fmt.Sprintf("image %d", i+1)
			}
			return nil, fmt.Errorf("report: %s: %w", name, err)
		}
		// The data: URI is built here from checked bytes only (base64 has
		// no character that needs escaping in an attribute), so it is safe
		// to mark as a URL.
		out = append(out, imageView{Caption: im.Caption,
			Src: template.URL("data:" + mime + ";base64," + base64.StdEncoding.EncodeToString(im.Data))})
	}
	return out, nil
}

// pngSignature opens every PNG file (ISO/IEC 15948:2004 clause 5.2).
var pngSignature = []byte{0x89, 'P', 'N', 'G', '\r', '\n', 0x1a, '\n'}

// ImageType tells an image's media type, "image/png" or "image/svg+xml":
// PNG by its signature, SVG by an <svg element near the start (after any
// XML declaration, comments or doctype). Anything else is an error.
func ImageType(b []byte) (string, error) {
	if bytes.HasPrefix(b, pngSignature) {
		return "image/png", nil
	}
	head := b
	if len(head) > 4096 {
		head = head[:4096]
	}
	t := bytes.TrimLeft(head, " \t\r\n\ufeff")
	if (bytes.HasPrefix(t, []byte("<?xml")) || bytes.HasPrefix(t, []byte("<svg")) || bytes.HasPrefix(t, []byte("<!"))) &&
		bytes.Contains(head, []byte("<svg")) {
		return "image/svg+xml", nil
	}
	if len(b) == 0 {
		return "", fmt.Errorf("empty image")
	}
	return "", fmt.Errorf("neither PNG nor SVG")
}
