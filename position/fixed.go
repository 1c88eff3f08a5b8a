package position

import (
	"context"
	"fmt"
	"time"

	"nullseek/station"
)

// Fixed is a station that does not move: its position from the station
// file, the same at every time.
type Fixed struct {
	fix Fix
}

// NewFixed returns a fixed source at lat, lon (degrees) with an optional
// height above the WGS84 ellipsoid (nil for none).
func NewFixed(latDeg, lonDeg float64, altHAEM *float64) (*Fixed, error) {
	f := Fix{LatDeg: latDeg, LonDeg: lonDeg, Mode: Mode2D, Source: station.PositionFixed, Time: time.Unix(0, 0)}
	if altHAEM != nil {
		f.AltHAEM, f.Mode = ptr(*altHAEM), Mode3D
	}
	if err := f.Usable(); err != nil {
		return nil, fmt.Errorf("fixed position: %w", err)
	}
	f.Time = time.Time{}
	return &Fixed{fix: f}, nil
}

// FromStation returns the source a station file names: Fixed for source
// "fixed", a GPSD client for "gpsd". A "nmea" feed needs its reader opened
// by the caller (a serial port or connection): use NewNMEA with it.
func FromStation(f *station.File) (Source, error) {
	p := f.Position
	switch p.Source {
	case station.PositionFixed:
		if !p.HasLatLon {
			return nil, fmt.Errorf("%s: position.lat_lon: missing for a fixed station", f.Path)
		}
		s, err := NewFixed(p.LatDeg, p.LonDeg, p.AltM)
		if err != nil {
			return nil, fmt.Errorf("%s: position: %w", f.Path, err)
		}
		return s, nil
	case station.PositionGPSD:
		return NewGPSD(p.GPSD), nil
	case station.PositionNMEA:
		return nil, fmt.Errorf("%s: position.nmea %q: open the feed and use position.NewNMEA", f.Path, p.NMEA)
	}
	return nil, fmt.Errorf("%s: position.source %q: want fixed, gpsd or nmea", f.Path, p.Source)
}

// Name returns "fixed".
func (s *Fixed) Name() string { return station.PositionFixed }

// Run waits for ctx to end: a fixed position has nothing to feed.
func (s *Fixed) Run(ctx context.Context) error {
	<-ctx.Done()
	return nil
}

// At returns the fixed position with Time set to t; it never fails.
func (s *Fixed) At(t time.Time) (Fix, error) {
	f := s.fix
	if f.AltHAEM != nil {
		f.AltHAEM = ptr(*f.AltHAEM)
	}
	f.Time = t.UTC()
	return f, nil
}
