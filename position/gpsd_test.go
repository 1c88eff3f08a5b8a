package position

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"math"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"nullseek/internal/testtool"
)

// movingLog is a hand-built NMEA 0183 log of a station moving north-east
// at about 10 m/s: GGA then RMC each second (checksums computed by
// sentence), with one epoch whose sentences are corrupted, one no-fix
// epoch (GGA quality 0, RMC status V), a GSV after every epoch so each RMC
// is followed by traffic, all on the given date.
func movingLog(day string, startSec int) []string {
	var out []string
	for i := 0; i < 8; i++ {
		tod := fmt.Sprintf("1200%02d", startSec+i)
		lat := fmt.Sprintf("4807.%03d", 38+5*i) // 0.005' ≈ 9.3 m a step
		lon := fmt.Sprintf("01131.%03d", 7*i)
		gga := sentence(fmt.Sprintf("GNGGA,%s,%s,N,%s,E,1,09,0.8,%.1f,M,46.9,M,,", tod, lat, lon, 545.4+0.5*float64(i)))
		rmc := sentence(fmt.Sprintf("GNRMC,%s,A,%s,N,%s,E,19.4,45.0,%s,,,A", tod, lat, lon, day))
		switch i {
		case 3: // corrupted on the line: checksums no longer match
			gga = strings.Replace(gga, ",N,", ",S,", 1)
			rmc = strings.Replace(rmc, ",N,", ",S,", 1)
		case 5:
			gga = sentence(fmt.Sprintf("GNGGA,%s,,,,,0,00,99.99,,M,,M,,", tod))
			rmc = sentence(fmt.Sprintf("GNRMC,%s,V,,,,,,,%s,,,N", tod, day))
		}
		out = append(out, gga, rmc, sentence("GPGSV,1,1,01,05,45,090,40"))
	}
	return out
}

func writeLog(t *testing.T, lines []string) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), "moving.nmea")
	if err := os.WriteFile(p, []byte(strings.Join(lines, "\r\n")+"\r\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func freePort(t *testing.T) int {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port
}

// TestNMEAAgainstGpsfake: gpsd 3.22 (Debian gpsd) decodes the log as
// gpsfake replays it (gpsfake(1): -1 once, -p print gpsd's JSON, -c
// seconds between sentences, -P port); every TPV with mode 2/3 and a time
// must be one of our reader's fixes at that time with the same position
// (gpsd prints degrees to 9 decimals, metres to 4), and every one of our
// fixes must be among gpsd's. Epochs 3 (bad checksums) and 5 (no fix) are
// in neither.
func TestNMEAAgainstGpsfake(t *testing.T) {
	if testing.Short() {
		t.Skip("gpsfake takes a few seconds")
	}
	bin := testtool.Need(t, "gpsfake")
	testtool.Need(t, "gpsd")
	lines := movingLog("010526", 0)
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	cmd := exec.CommandContext(ctx, bin, "-1", "-p", "-c", "0.02", "-P", strconv.Itoa(freePort(t)), writeLog(t, lines))
	cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
	cmd.Cancel = func() error { return syscall.Kill(-cmd.Process.Pid, syscall.SIGKILL) }
	cmd.WaitDelay = 5 * time.Second
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("gpsfake: %v\n%s", err, stderr.String())
	}
	ours := NewNMEA("log", strings.NewReader(strings.Join(lines, "\r\n")))
	if err := ours.Run(context.Background()); err != nil {
		t.Fatal(err)
	}
	byTime := map[time.Time]Fix{}
	for _, f := range ours.Track.Fixes() {
		byTime[f.Time] = f
	}
	if len(byTime) != 6 {
		t.Fatalf("our reader made %d fixes, want 6 (8 epochs less 2): %+v", len(byTime), ours.Stats())
	}
	seen := map[time.Time]bool{}
	for _, l := range strings.Split(string(out), "\n") {
		var r tpv // the client's own decoding of gpsd(8) TPV JSON
		if !strings.HasPrefix(l, `{"class":"TPV"`) || json.Unmarshal([]byte(l), &r) != nil || r.Time == "" || r.Mode < 2 {
			continue
		}
		tm, err := time.Parse(time.RFC3339Nano, r.Time)
		if err != nil {
			t.Fatal(err)
		}
		f, ok := byTime[tm]
		if !ok {
			t.Errorf("gpsd has a fix at %v that we do not: %s", tm, l)
			continue
		}
		seen[tm] = true
		if math.Abs(*r.Lat-f.LatDeg) > 1e-9 || math.Abs(*r.Lon-f.LonDeg) > 1e-9 || r.Mode != int(f.Mode) ||
			math.Abs(*r.AltHAE-*f.AltHAEM) > 1e-4 || math.Abs(*r.AltMSL-*f.AltMSLM) > 1e-4 {
			t.Errorf("at %v gpsd says %s, we %+v", tm, l, f)
		}
	}
	if len(seen) != len(byTime) {
		t.Errorf("gpsd confirmed %d of our %d fixes:\n%s", len(seen), len(byTime), out)
	}
}

// nmeaServer is the NMEA 0183 TCP source gpsd reads (gpsd(8): a device
// "tcp://host:port"); send writes sentences to its newest connection.
type nmeaServer struct {
	ln    net.Listener
	mu    sync.Mutex
	conns []net.Conn
}

func newNMEAServer(t *testing.T) *nmeaServer {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	s := &nmeaServer{ln: ln}
	go func() {
		for {
			c, err := ln.Accept()
			if err != nil {
				return
			}
			s.mu.Lock()
			s.conns = append(s.conns, c)
			s.mu.Unlock()
		}
	}()
	t.Cleanup(func() {
		ln.Close()
		s.mu.Lock()
		for _, c := range s.conns {
			c.Close()
		}
		s.mu.Unlock()
	})
	return s
}

func (s *nmeaServer) count() int { s.mu.Lock(); defer s.mu.Unlock(); return len(s.conns) }

func (s *nmeaServer) send(t *testing.T, lines []string) {
	s.mu.Lock()
	c := s.conns[len(s.conns)-1]
	s.mu.Unlock()
	for _, l := range lines {
		if _, err := c.Write([]byte(l + "\r\n")); err != nil {
			t.Fatal(err)
		}
		time.Sleep(10 * time.Millisecond)
	}
}

// startGPSD runs gpsd 3.22 in the foreground (-N), opening its device at
// once (-n), serving port (-S) on loopback, reading src (gpsd(8)). stop
// kills it and returns once it has exited. A gpsd that cannot bind yet
// (the port of one just killed) is started again, for up to 10 s.
func startGPSD(t *testing.T, port int, src string) (stop func()) {
	t.Helper()
	bin := testtool.Need(t, "gpsd")
	var out bytes.Buffer
	for deadline := time.Now().Add(10 * time.Second); ; {
		out.Reset()
		cmd := exec.Command(bin, "-N", "-n", "-S", strconv.Itoa(port), src)
		cmd.Stdout, cmd.Stderr = &out, &out
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		done := make(chan struct{})
		go func() { cmd.Wait(); close(done) }()
		select {
		case <-done: // gpsd -N exits at once only when it cannot start
			if time.Now().After(deadline) {
				t.Fatalf("gpsd did not start:\n%s", out.String())
			}
			time.Sleep(200 * time.Millisecond)
			continue
		case <-time.After(500 * time.Millisecond):
		}
		stopped := false
		stop = func() {
			if !stopped {
				cmd.Process.Kill()
				<-done
				stopped = true
			}
		}
		t.Cleanup(func() {
			stop()
			if t.Failed() {
				t.Logf("gpsd output:\n%s", out.String())
			}
		})
		return stop
	}
}

func waitFor(t *testing.T, what string, cond func() bool) {
	t.Helper()
	for deadline := time.Now().Add(20 * time.Second); !cond(); time.Sleep(20 * time.Millisecond) {
		if time.Now().After(deadline) {
			t.Fatalf("timed out waiting for %s", what)
		}
	}
}

// TestGPSDClient runs the client against real gpsd 3.22 (-N -n on
// loopback) fed over TCP: the fixes it takes from gpsd's TPVs must be our
// NMEA reader's fixes of the same sentences, time for time (9 decimals of
// degrees, 4 of metres, as gpsd prints), carrying gpsd's eph; then gpsd is
// killed and restarted on the same port and the client must come back by
// itself and take the second log's fixes.
func TestGPSDClient(t *testing.T) {
	if testing.Short() {
		t.Skip("gpsd runs take a few seconds")
	}
	src := newNMEAServer(t)
	port := freePort(t)
	dev := "tcp://" + src.ln.Addr().String()
	logs := [][]string{movingLog("010526", 0), movingLog("010526", 30)}

	g := NewGPSD(fmt.Sprintf("127.0.0.1:%d", port))
	g.Logger, g.MinBackoff, g.MaxBackoff = quietLog, 20*time.Millisecond, 200*time.Millisecond
	ctx, cancel := context.WithCancel(context.Background())
	runErr := make(chan error, 1)
	go func() { runErr <- g.Run(ctx) }()
	defer func() {
		cancel()
		if err := <-runErr; err != nil {
			t.Error(err)
		}
	}()

	stop := startGPSD(t, port, dev)
	waitFor(t, "the client's WATCH and gpsd's device connection", func() bool { return g.Stats().Watching && src.count() >= 1 })
	src.send(t, logs[0])
	waitFor(t, "6 fixes from gpsd", func() bool { return g.Track.Len() >= 6 })
	before := g.Stats()
	stop()
	waitFor(t, "the client to see gpsd go", func() bool { return g.Stats().Drops > before.Drops })
	n := src.count()
	startGPSD(t, port, dev)
	waitFor(t, "the client back on the new gpsd", func() bool {
		st := g.Stats()
		return st.Connects > before.Connects && st.Watching && src.count() > n
	})
	src.send(t, logs[1])
	waitFor(t, "12 fixes from gpsd", func() bool { return g.Track.Len() >= 12 })

	st := g.Stats()
	if st.Release != "3.22" || st.Bad != 0 || len(st.Devices) != 1 || st.Devices[0] != dev {
		t.Errorf("stats %+v", st)
	}
	ours := NewNMEA("log", strings.NewReader(strings.Join(append(logs[0], logs[1]...), "\r\n")))
	if err := ours.Run(context.Background()); err != nil {
		t.Fatal(err)
	}
	want, got := ours.Track.Fixes(), g.Track.Fixes()
	if len(got) != len(want) || len(want) != 12 {
		t.Fatalf("gpsd gave %d fixes, we decoded %d\ngpsd: %v\nours: %v", len(got), len(want), times(got), times(want))
	}
	for i := range want {
		w, f := want[i], got[i]
		if !f.Time.Equal(w.Time) || math.Abs(f.LatDeg-w.LatDeg) > 1e-9 || math.Abs(f.LonDeg-w.LonDeg) > 1e-9 ||
			f.Mode != Mode3D || math.Abs(*f.AltHAEM-*w.AltHAEM) > 1e-4 || math.Abs(*f.AltMSLM-*w.AltMSLM) > 1e-4 {
			t.Errorf("fix %d: gpsd %+v\nours %+v", i, f, w)
		}
		if f.HErrM == nil || f.HDOP != nil || !strings.HasPrefix(f.Source, "gpsd 127.0.0.1:") {
			t.Errorf("fix %d: a gpsd fix carries gpsd's error estimate and no HDOP: %+v", i, f)
		}
	}
	// The first fix against the sentence by hand: 4807.038 N 01131.000 E,
	// 545.4 m MSL + 46.9 m geoid separation, 2026-05-01 12:00:00 UTC.
	if f := got[0]; !f.Time.Equal(time.Date(2026, 5, 1, 12, 0, 0, 0, time.UTC)) || math.Abs(f.LatDeg-48.1173) > 1e-9 ||
		math.Abs(f.LonDeg-(11+31.0/60)) > 1e-9 || math.Abs(*f.AltHAEM-592.3) > 1e-4 {
		t.Errorf("first fix %+v", f)
	}
}

func times(f []Fix) []string {
	var s []string
	for _, x := range f {
		s = append(s, x.Time.Format("15:04:05"))
	}
	return s
}
