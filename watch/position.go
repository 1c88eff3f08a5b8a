package watch

import (
	"context"
	"errors"
	"fmt"
	"net"
	"strings"
	"time"

	"nullseek/capture"
	"nullseek/position"
	"nullseek/sdr"
	"nullseek/station"
)

// keepFixes is how much of a moving station's track is kept behind the
// newest fix: more than the longest burst a bearing is fitted over, so
// the middle of any burst still finds the fixes around it.
const keepFixes = 30 * time.Minute

// positionDialTimeout bounds connecting to an NMEA position feed.
const positionDialTimeout = 5 * time.Second

// livePosition is where the station is: the station file's fixed
// position, or a moving station's gpsd or NMEA feed kept in a
// position.Track.
type livePosition struct {
	src   position.Source
	track *position.Track // nil for a fixed station
	// moving says the position comes from a feed (every bearing asks it).
	moving bool
	// lost is the scan goroutine's: a bearing was last logged without a
	// position (the warning was given once).
	lost bool
}

// newLivePosition opens nothing yet: run feeds it.
func newLivePosition(st *station.File) (*livePosition, error) {
	p := st.Position
	switch p.Source {
	case station.PositionGPSD:
		g := position.NewGPSD(p.GPSD)
		g.Logger = discard // the watch says it once, from the track going stale
		return &livePosition{src: g, track: g.Track, moving: true}, nil
	case station.PositionNMEA:
		host, ok := strings.CutPrefix(p.NMEA, "tcp://")
		if !ok {
			return nil, fmt.Errorf("%s: position.nmea %q: watch reads a GGA/RMC feed over tcp://HOST:PORT; for a GPS on a serial port or UDP run gpsd on it and set source = \"gpsd\"", st.Path, p.NMEA)
		}
		f := &nmeaFeed{addr: strings.TrimSuffix(host, "/"), track: &position.Track{}}
		return &livePosition{src: f, track: f.track, moving: true}, nil
	}
	s, err := position.FromStation(st)
	if err != nil {
		return nil, err
	}
	return &livePosition{src: s}, nil
}

// name says where the position comes from, for the watch's first line.
func (p *livePosition) name(st *station.File) string {
	if p.moving {
		return p.src.Name()
	}
	return fmt.Sprintf("the station file (%.5f, %.5f)", st.Position.LatDeg, st.Position.LonDeg)
}

// run feeds the source until ctx ends, trimming the track as it grows.
func (p *livePosition) run(ctx context.Context) error {
	if p.track != nil {
		go func() {
			tick := time.NewTicker(time.Minute)
			defer tick.Stop()
			for {
				select {
				case <-ctx.Done():
					return
				case <-tick.C:
				}
				if fs := p.track.Fixes(); len(fs) > 0 {
					p.track.Trim(fs[len(fs)-1].Time.Add(-keepFixes))
				}
			}
		}()
	}
	return p.src.Run(ctx)
}

// nmeaFeed is a position.Source reading GGA/RMC sentences from a TCP
// server (a GPS's network bridge, gpsd's NMEA relay), dialled again with
// backoff when it goes away; all connections feed one Track.
type nmeaFeed struct {
	addr  string
	track *position.Track
}

func (f *nmeaFeed) Name() string { return "nmea tcp://" + f.addr }

func (f *nmeaFeed) At(t time.Time) (position.Fix, error) { return f.track.At(t) }

func (f *nmeaFeed) Run(ctx context.Context) error {
	backoff := 250 * time.Millisecond
	for ctx.Err() == nil {
		d := net.Dialer{Timeout: positionDialTimeout}
		c, err := d.DialContext(ctx, "tcp", f.addr)
		if err == nil {
			n := position.NewNMEA("tcp://"+f.addr, c)
			n.Track = f.track
			err = n.Run(ctx)
			c.Close()
			if n.Stats().Fixes > 0 {
				backoff = 250 * time.Millisecond
			}
		}
		if ctx.Err() != nil {
			return nil
		}
		select {
		case <-ctx.Done():
		case <-time.After(backoff):
		}
		backoff = min(2*backoff, 10*time.Second)
	}
	return nil
}

// place stamps br with where the station was at t (the middle of the
// burst the bearing was fitted over). A moving station's feed without a
// fix near t gives a bearing without position, with one warning until
// fixes return; the second result is false then.
func (w *watcher) place(t time.Time) (position.Fix, bool) {
	p := w.pos
	f, err := p.src.At(t)
	switch {
	case err == nil && p.lost:
		p.lost = false
		w.logf("%s has fixes again: bearings carry the station's position again", p.src.Name())
	case err != nil && !p.lost:
		p.lost = true
		why := err.Error()
		if errors.Is(err, position.ErrStale) {
			why = strings.TrimPrefix(why, position.ErrStale.Error()+": ")
		}
		w.logf("warning: %s: no position at %s (%s): bearings are logged without the station's position until fixes return",
			p.src.Name(), t.UTC().Format("15:04:05.0"), why)
	}
	return f, err == nil
}

// startRecording starts the rotating SigMF recording of Options.RecordDir.
func (w *watcher) startRecording() error {
	every := w.o.RecordEvery
	if every == 0 {
		every = capture.DefaultRecordEvery
	}
	prefix := strings.Map(func(r rune) rune {
		if r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9' || r == '-' || r == '_' {
			return r
		}
		return '-'
	}, w.st.Name)
	rec, err := sdr.NewRotatingSigMF(w.info, sdr.RotateOptions{Dir: w.o.RecordDir, Prefix: prefix, Every: every,
		MaxBytes: w.o.RecordMaxBytes, Position: w.geolocation})
	if err != nil {
		return fmt.Errorf("--record %s: %w", w.o.RecordDir, err)
	}
	w.rec = rec
	return nil
}

// geolocation is the station's position now (at the stream's latest
// sample) as core:geolocation wants it, nil while unknown.
func (w *watcher) geolocation() *sdr.GeoPoint {
	t := w.info.Start.Add(time.Duration(float64(w.samples.Load()) / w.info.SampleRate * float64(time.Second)))
	f, err := w.pos.src.At(t)
	if err != nil {
		return nil
	}
	c := []float64{f.LonDeg, f.LatDeg}
	if f.AltHAEM != nil {
		c = append(c, *f.AltHAEM)
	}
	return &sdr.GeoPoint{Type: "Point", Coordinates: c}
}
