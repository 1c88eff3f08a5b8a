// Package palette holds the colours that the map (mapplot) and the KML
// export (geo) share (and the map's own: grid labels, shading), so a transmitter's bearings, the error ellipses, the
// grid and rejected bearings look the same in both. Colours are
// non-premultiplied sRGB with alpha.
package palette

import (
	"fmt"
	"image/color"
)

var (
	Rejected = color.NRGBA{R: 110, G: 110, B: 110, A: 255}
	Ellipse  = color.NRGBA{R: 200, G: 0, B: 0, A: 255}
	Grid     = color.NRGBA{R: 0, G: 120, B: 60, A: 170}
	Station  = color.NRGBA{R: 0, G: 0, B: 0, A: 255}
	// GridLabel is the ink of the grid's column letters and row numbers.
	GridLabel = color.NRGBA{R: 0, G: 100, B: 50, A: 255}
	// Shade is the likelihood shading's hue; its alpha grows with the
	// likelihood (the map's legend swatch shows it at ShadeSwatchAlpha).
	Shade            = color.NRGBA{R: 255, G: 150, B: 0, A: 255}
	ShadeSwatchAlpha = uint8(120)
	// Transmitters: one colour each for its bearings and wedges, in turn.
	Transmitters = []color.NRGBA{
		{R: 20, G: 70, B: 200, A: 255},
		{R: 0, G: 130, B: 120, A: 255},
		{R: 130, G: 40, B: 170, A: 255},
		{R: 150, G: 90, B: 0, A: 255},
		{R: 60, G: 60, B: 60, A: 255},
	}
)

// Transmitter is the colour of the i-th transmitter (i ≥ 0, wrapping).
func Transmitter(i int) color.NRGBA {
	if i < 0 {
		i = -i
	}
	return Transmitters[i%len(Transmitters)]
}

// WithAlpha returns c with alpha a.
func WithAlpha(c color.NRGBA, a uint8) color.NRGBA { c.A = a; return c }

// KML writes c as KML's aabbggrr hex (OGC KML 2.2, 16.9 kml:color).
func KML(c color.NRGBA) string { return fmt.Sprintf("%02x%02x%02x%02x", c.A, c.B, c.G, c.R) }
