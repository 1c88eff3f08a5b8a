package station

import (
	"strconv"
	"strings"
)

// Setting is one value the station file gives a command, under the name
// of the command-line flag it stands for (without the dashes) and in the
// flag's own grammar. A command applies the settings of the flags it has
// that the user did not give: a flag given explicitly wins.
type Setting struct {
	Flag, Value string
}

// Settings are the file's values as flag settings. The channel is the
// first [[channel]] (a one-shot command listens on one); live-receiver
// values (receiver, rotator, compass) are watch's and are not among them.
func (f *File) Settings() []Setting {
	num := func(x float64) string { return strconv.FormatFloat(x, 'f', -1, 64) }
	var out []Setting
	add := func(flag, v string) { out = append(out, Setting{flag, v}) }
	if f.Database != "" {
		add("db", f.Database)
	}
	if len(f.Channels) > 0 {
		c := f.Channels[0]
		add("freq", num(c.FreqHz))
		if c.Mode != "" {
			add("mode", c.Mode)
		}
		if len(c.IDs) > 0 {
			add("ids", strings.Join(c.IDs, ","))
		}
	}
	if f.Position.HasLatLon {
		add("station", num(f.Position.LatDeg)+","+num(f.Position.LonDeg))
	}
	if f.Position.DeclinationDeg != nil {
		add("declination", num(*f.Position.DeclinationDeg))
	}
	switch f.Antenna.Kind {
	case AntennaPattern:
		add("antenna", f.Antenna.PatternFile)
	case "":
	default:
		add("antenna", f.Antenna.Kind)
	}
	if f.Antenna.MountOffsetDeg != 0 {
		add("mount-offset", num(f.Antenna.MountOffsetDeg))
	}
	if f.Heading.Reference != "" {
		add("heading-ref", f.Heading.Reference)
	}
	if f.Heading.Source == HeadingLog && f.Heading.Log != "" {
		add("headings", f.Heading.Log)
	}
	if f.Heading.LagS != 0 {
		add("lag", num(f.Heading.LagS))
	}
	return out
}
