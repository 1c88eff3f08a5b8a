package watch

import (
	"context"
	"fmt"
	"math"
	"net"
	"testing"
	"time"

	"nullseek/internal/nmea"
	"nullseek/position"
)

// TestNMEAFeedReconnects: a position feed over TCP that hangs up after
// three epochs and answers again is dialled again, and both connections'
// fixes join one track. Expected positions are the sentences' own fields
// read by NMEA 0183's ddmm.mmmm layout (4500.0600 N = 45.001°).
func TestNMEAFeedReconnects(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	t0 := time.Date(2026, 5, 1, 12, 0, 0, 0, time.UTC)
	sentence := func(body string) string { return fmt.Sprintf("$%s*%02X\r\n", body, nmea.Checksum(body)) }
	go func() {
		for conn := 0; conn < 2; conn++ {
			c, err := ln.Accept()
			if err != nil {
				return
			}
			for i := 3 * conn; i < 3*conn+3; i++ {
				tod := t0.Add(time.Duration(i) * time.Second).Format("150405.00")
				lat := fmt.Sprintf("4500.%04d", 600*i)
				fmt.Fprint(c, sentence(fmt.Sprintf("GPGGA,%s,%s,N,00600.0000,E,1,08,0.9,100.0,M,47.0,M,,", tod, lat)))
				fmt.Fprint(c, sentence(fmt.Sprintf("GPRMC,%s,A,%s,N,00600.0000,E,0.0,0.0,010526,,,A", tod, lat)))
			}
			fmt.Fprint(c, sentence("GPGSV,1,1,00")) // ends the last epoch
			c.Close()
		}
	}()
	f := &nmeaFeed{addr: ln.Addr().String(), track: &position.Track{}}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- f.Run(ctx) }()
	for deadline := time.Now().Add(10 * time.Second); f.track.Len() < 6; time.Sleep(20 * time.Millisecond) {
		if time.Now().After(deadline) {
			t.Fatalf("%d fixes after 10 s, want 6 from two connections", f.track.Len())
		}
	}
	cancel()
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	for i, fx := range f.track.Fixes() {
		if want := 45 + 0.06*float64(i)/60; math.Abs(fx.LatDeg-want) > 1e-12 || fx.LonDeg != 6 || !fx.Time.Equal(t0.Add(time.Duration(i)*time.Second)) {
			t.Errorf("fix %d: %+v, want %.6f N 6 E at %v", i, fx, want, t0.Add(time.Duration(i)*time.Second))
		}
	}
	if got, err := f.At(t0.Add(2500 * time.Millisecond)); err != nil || math.Abs(got.LatDeg-(45+0.06*2.5/60)) > 1e-9 {
		t.Errorf("between the connections' fixes: %+v %v", got, err)
	}
}
