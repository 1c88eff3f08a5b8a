package position

import (
	"bufio"
	"context"
	"errors"
	"io"
	"log/slog"
	"net"
	"strings"
	"testing"
	"time"
)

// fakeGPSD accepts connections on loopback and plays one script per
// connection (the last repeats), after reading the client's first line.
// It stands in for gpsd where a real one cannot be made to misbehave; the
// report shapes follow gpsd_json(5) (gpsd 3.22).
func fakeGPSD(t *testing.T, scripts ...[]string) (addr string, watch chan string) {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { ln.Close() })
	watch = make(chan string, 16)
	go func() {
		for i := 0; ; i++ {
			c, err := ln.Accept()
			if err != nil {
				return
			}
			go func(c net.Conn, script []string) {
				defer c.Close()
				l, _ := bufio.NewReader(c).ReadString('\n')
				watch <- l
				for _, s := range script {
					if s == "HOLD" {
						io.Copy(io.Discard, c) // keep the connection open
						return
					}
					io.WriteString(c, s+"\n")
				}
			}(c, scripts[min(i, len(scripts)-1)])
		}
	}()
	return ln.Addr().String(), watch
}

var quietLog = slog.New(slog.NewTextHandler(io.Discard, nil))

const version = `{"class":"VERSION","release":"3.22","rev":"3.22","proto_major":3,"proto_minor":14}`

func TestGPSDReports(t *testing.T) {
	addr, watch := fakeGPSD(t, []string{
		version,
		`{"class":"DEVICES","devices":[{"class":"DEVICE","path":"/dev/ttyACM0"}]}`,
		`{"class":"WATCH","enable":true,"json":true}`,
		`{"class":"TPV","mode":1,"time":"2026-05-01T12:00:00.000Z"}`,
		`{"class":"TPV","mode":3,"lat":48.1,"lon":11.5}`, // no time
		`{"class":"TPV","mode":3,"time":"2026-05-01T12:00:01.000Z","lat":48.1,"lon":11.5,"altHAE":600.5,"altMSL":553.6,"epx":3.2,"epy":4.1}`,
		`{"class":"SKY","satellites":[]}`,
		`not json at all`,
		`{"mode":3}`,
		`{"class":"TPV","mode":2,"time":"2026-05-01T12:00:02.500Z","lat":-48.1,"lon":-11.5,"altHAE":600.5,"eph":7.5}`,
		`{"class":"TPV","mode":2,"time":"2026-05-01T12:00:02.000Z","lat":-48.1,"lon":-11.5}`, // earlier
		`{"class":"TPV","mode":2,"time":"2026-05-01T12:00:03.000Z","lat":95,"lon":-11.5}`,    // out of range
		`{"class":"ERROR","message":"unrecognized request"}`,
		`{"class":"TPV","pad":"` + strings.Repeat("x", MaxGPSDLine) + `"}`,
		`{"class":"TPV","mode":2,"time":"2026-05-01T12:00:04.000Z","lat":1,"lon":2}`,
		"HOLD",
	})
	g := NewGPSD(addr)
	g.Logger = quietLog
	var onFix []Fix
	g.OnFix = func(f Fix) { onFix = append(onFix, f) }
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- g.Run(ctx) }()
	if w := <-watch; w != `?WATCH={"enable":true,"json":true}`+"\n" {
		t.Errorf("client sent %q", w)
	}
	waitFor(t, "3 fixes", func() bool { return g.Track.Len() == 3 })
	cancel()
	endsWithin(t, done, 5*time.Second, "Run did not end after cancel while connected")
	st := g.Stats()
	want := GPSDStats{Connects: 1, TPV: 7, Fixes: 3, NoFix: 3, OutOfOrder: 1, Other: 1, Bad: 3, Release: "3.22",
		Devices: []string{"/dev/ttyACM0"}, LastError: "unrecognized request", Watching: true}
	want.First = st.First
	if st.Connects != want.Connects || st.TPV != want.TPV || st.Fixes != want.Fixes || st.NoFix != want.NoFix ||
		st.OutOfOrder != want.OutOfOrder || st.Other != want.Other || st.Bad != want.Bad || st.Release != want.Release ||
		len(st.Devices) != 1 || st.Devices[0] != "/dev/ttyACM0" || st.LastError != want.LastError || !st.Watching {
		t.Errorf("stats\n %+v\nwant\n %+v", st, want)
	}
	f := g.Track.Fixes()
	if len(onFix) != 3 {
		t.Errorf("OnFix saw %d fixes", len(onFix))
	}
	if f[0].Mode != Mode3D || *f[0].AltHAEM != 600.5 || *f[0].AltMSLM != 553.6 || *f[0].HErrM != 4.1 {
		t.Errorf("3D fix with epx/epy: %+v", f[0])
	}
	if f[1].Mode != Mode2D || f[1].AltHAEM != nil || *f[1].HErrM != 7.5 || f[1].LatDeg != -48.1 ||
		!f[1].Time.Equal(time.Date(2026, 5, 1, 12, 0, 2, 5e8, time.UTC)) {
		t.Errorf("2D fix with eph: %+v", f[1])
	}
}

// TestGPSDDrops: a gpsd that closes at once is retried with backoff (each
// attempt a connection), and one speaking another protocol major version
// ends Run with ErrGPSDProtocol.
func TestGPSDDrops(t *testing.T) {
	addr, _ := fakeGPSD(t, []string{version}, []string{version},
		[]string{version, `{"class":"TPV","mode":2,"time":"2026-05-01T12:00:04.000Z","lat":1,"lon":2}`, "HOLD"})
	g := NewGPSD(addr)
	g.Logger, g.MinBackoff, g.MaxBackoff = quietLog, 10*time.Millisecond, 40*time.Millisecond
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- g.Run(ctx) }()
	waitFor(t, "a fix on the third connection", func() bool { return g.Track.Len() == 1 })
	cancel()
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	if st := g.Stats(); st.Connects != 3 || st.Drops != 2 {
		t.Errorf("stats %+v", st)
	}

	addr, _ = fakeGPSD(t, []string{`{"class":"VERSION","release":"9.0","proto_major":4,"proto_minor":0}`, "HOLD"})
	g = NewGPSD(addr)
	g.Logger = quietLog
	err := g.Run(context.Background())
	if !errors.Is(err, ErrGPSDProtocol) || !strings.Contains(err.Error(), "proto_major 4") || !strings.Contains(err.Error(), addr) {
		t.Errorf("protocol 4: %v", err)
	}

	// Nothing listening: Run keeps trying until cancelled.
	g = NewGPSD(addr) // the listener above is still open; use a closed port
	l, _ := net.Listen("tcp", "127.0.0.1:0")
	g.Addr = l.Addr().String()
	l.Close()
	g.Logger, g.MinBackoff, g.MaxBackoff = quietLog, 5*time.Millisecond, 10*time.Millisecond
	ctx, cancel = context.WithTimeout(context.Background(), 300*time.Millisecond)
	defer cancel()
	if err := g.Run(ctx); err != nil {
		t.Errorf("refused: %v", err)
	}
	if st := g.Stats(); st.Connects != 0 || st.Drops < 3 {
		t.Errorf("refused stats %+v", st)
	}
}
