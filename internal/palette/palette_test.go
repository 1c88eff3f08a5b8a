package palette

import (
	"image/color"
	"testing"
)

// OGC KML 2.2 §16.9: kml:color is aabbggrr, so opaque pure red is ff0000ff.
func TestKMLOrder(t *testing.T) {
	for _, c := range []struct {
		in   color.NRGBA
		want string
	}{{color.NRGBA{R: 255, A: 255}, "ff0000ff"}, {color.NRGBA{B: 255, A: 64}, "40ff0000"}, {Ellipse, "ff0000c8"}} {
		if got := KML(c.in); got != c.want {
			t.Errorf("KML(%v) = %s, want %s", c.in, got, c.want)
		}
	}
	if Transmitter(len(Transmitters)) != Transmitter(0) || Transmitter(-1) != Transmitter(1) {
		t.Error("Transmitter does not wrap")
	}
}
