//go:build unix

package watch

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
	"sort"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"nullseek/internal/nmea"
	"nullseek/internal/testtool"
	"nullseek/store"
)

// movingNMEA writes an NMEA 0183 log (GGA then RMC each second, NMEA 0183
// v4.11 §§ GGA, RMC field layouts; checksums by internal/nmea) of a
// station driving north-east at about 11 m/s north and 8 m/s east, from
// t0 for n seconds, with no fix (GGA quality 0, RMC status V) in the
// seconds [gapFrom, gapTo).
func movingNMEA(t *testing.T, dir string, t0 time.Time, n, gapFrom, gapTo int) string {
	t.Helper()
	sentence := func(body string) string { return fmt.Sprintf("$%s*%02X", body, nmea.Checksum(body)) }
	var b strings.Builder
	for i := 0; i < n; i++ {
		tm := t0.Add(time.Duration(i) * time.Second).UTC()
		tod, day := tm.Format("150405.00"), tm.Format("020106")
		lat, lon := 45.0+1e-4*float64(i), 6.0+1e-4*float64(i)
		latS := fmt.Sprintf("%02d%08.5f", int(lat), (lat-math.Floor(lat))*60)
		lonS := fmt.Sprintf("%03d%08.5f", int(lon), (lon-math.Floor(lon))*60)
		gga := sentence(fmt.Sprintf("GPGGA,%s,%s,N,%s,E,1,09,0.9,%.1f,M,47.0,M,,", tod, latS, lonS, 400+0.1*float64(i)))
		rmc := sentence(fmt.Sprintf("GPRMC,%s,A,%s,N,%s,E,27.0,36.0,%s,,,A", tod, latS, lonS, day))
		if i >= gapFrom && i < gapTo {
			gga = sentence(fmt.Sprintf("GPGGA,%s,,,,,0,00,99.99,,M,,M,,", tod))
			rmc = sentence(fmt.Sprintf("GPRMC,%s,V,,,,,,,%s,,,N", tod, day))
		}
		b.WriteString(gga + "\r\n" + rmc + "\r\n")
	}
	p := filepath.Join(dir, "moving.nmea")
	if err := os.WriteFile(p, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// gpsdFix is a TPV report of gpsd as gpsfake -p prints it (gpsd_json(5),
// gpsd 3.22).
type gpsdFix struct {
	Class string  `json:"class"`
	Mode  int     `json:"mode"`
	Time  string  `json:"time"`
	Lat   float64 `json:"lat"`
	Lon   float64 `json:"lon"`
	when  time.Time
}

// TestWatchMovingStation: a watch whose station file takes its position
// from gpsd, with gpsd 3.22 run by gpsfake (Debian gpsd; gpsfake(1): -1
// once, -p print gpsd's reports, -c seconds between sentences, -P port)
// replaying a log of a moving station in step with the served recording,
// stamps each bearing with where the station was at the middle of its
// burst. The reference is gpsd's own TPV reports: the stored position must
// lie on the line between the two TPVs around that time, at the time's
// fraction (over 11 m steps the WGS84 geodesic and the straight line in
// degrees differ by far less than the 1 cm allowed). The log's fixes stop
// for 20 s from 2 s into the watch, around the first burst's middle: that
// bearing is stored without position, with one warning, and the second
// has a position again.
func TestWatchMovingStation(t *testing.T) {
	t.Parallel()
	const seconds = recSeconds // bursts at 0–17 and 19–36 s, each a bearing
	dir := t.TempDir()
	meta := makeRecording(t, dir)
	rot, _ := testtool.Rotctld(t)
	gpsfake := testtool.Need(t, "gpsfake")
	testtool.Need(t, "gpsd")

	// The log runs from 5 s before now; the watch's sample 0 is within a
	// few seconds after now, so the no-fix seconds 7–27 of the log (2–22 s
	// from now) hold the first burst's middle (8.5 s) more than the
	// position package's 5 s staleness from any fix.
	t0 := time.Now().Truncate(time.Second).Add(-5 * time.Second)
	logPath := movingNMEA(t, dir, t0, 80, 7, 27)
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	port := l.Addr().(*net.TCPAddr).Port
	l.Close()
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	defer cancel()
	// 2 sentences an epoch at 0.45 s: a little faster than real time, so
	// the fixes of a burst's middle are in before the burst ends.
	fake := exec.CommandContext(ctx, gpsfake, "-1", "-p", "-c", "0.45", "-P", strconv.Itoa(port), logPath)
	fake.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
	fake.Cancel = func() error { return syscall.Kill(-fake.Process.Pid, syscall.SIGKILL) }
	fake.WaitDelay = 5 * time.Second
	var fakeOut, fakeErr bytes.Buffer
	fake.Stdout, fake.Stderr = &fakeOut, &fakeErr
	if err := fake.Start(); err != nil {
		t.Fatal(err)
	}
	fakeDone := make(chan error, 1)
	go func() { fakeDone <- fake.Wait() }()
	defer func() { cancel(); <-fakeDone }()

	sp := writeStation(t, dir, serve(t, meta), rot)
	text, err := os.ReadFile(sp)
	if err != nil {
		t.Fatal(err)
	}
	moving := strings.Replace(string(text), `source = "fixed"`+"\n"+`lat_lon = "45.0, 6.0"`,
		fmt.Sprintf(`source = "gpsd"`+"\n"+`gpsd = "127.0.0.1:%d"`, port), 1)
	if err := os.WriteFile(sp, []byte(moving), 0o644); err != nil {
		t.Fatal(err)
	}
	db, log, wait := watchInBackground(t, sp, Options{DurationS: seconds, StatusPeriod: 5 * time.Second})
	sum, runErr := wait()
	out := log.String()
	t.Logf("log:\n%s", out)
	if runErr != nil {
		t.Fatal(runErr)
	}
	if err := <-fakeDone; err != nil {
		t.Fatalf("gpsfake: %v\n%s", err, fakeErr.String())
	}
	fakeDone <- nil

	var ref []gpsdFix
	for _, line := range strings.Split(fakeOut.String(), "\n") {
		var f gpsdFix
		if json.Unmarshal([]byte(line), &f) != nil || f.Class != "TPV" || f.Mode < 2 || f.Time == "" {
			continue
		}
		if f.when, err = time.Parse(time.RFC3339Nano, f.Time); err != nil {
			t.Fatal(err)
		}
		ref = append(ref, f)
	}
	sort.Slice(ref, func(i, j int) bool { return ref[i].when.Before(ref[j].when) })
	if len(ref) < 40 {
		t.Fatalf("gpsd reported %d fixes of the 60 in the log", len(ref))
	}
	bursts, err := db.BurstsOfCapture(sum.Capture)
	if err != nil {
		t.Fatal(err)
	}
	dur := map[int64]float64{}
	for _, b := range bursts {
		dur[b.StartSample] = b.EndS - b.StartS
	}
	bs, err := db.Bearings(store.BearingQuery{Station: "Test Ridge"})
	if err != nil {
		t.Fatal(err)
	}
	if len(bs) != 2 {
		t.Fatalf("%d bearings stored, want one for each of the 2 whole bursts", len(bs))
	}
	var worst float64
	for i, b := range bs {
		mid := b.Time.Add(time.Duration(dur[b.BurstStartSample] / 2 * float64(time.Second)))
		k := sort.Search(len(ref), func(k int) bool { return !ref[k].when.Before(mid) })
		bracketed := k > 0 && k < len(ref) && ref[k].when.Sub(ref[k-1].when) <= 2*time.Second
		switch {
		case i == 0:
			if !b.NoPosition {
				t.Errorf("bearing 1 (middle %s, in the no-fix stretch) has a position %.6f, %.6f", mid.Format(time.TimeOnly), b.StationLatDeg, b.StationLonDeg)
			}
			continue
		case b.NoPosition || !bracketed:
			t.Errorf("bearing %d (middle %s): no position stored (%v) or gpsd has no fixes around it (%v)", i+1, mid.Format(time.TimeOnly), b.NoPosition, bracketed)
			continue
		}
		a, c := ref[k-1], ref[k]
		frac := float64(mid.Sub(a.when)) / float64(c.when.Sub(a.when))
		lat, lon := a.Lat+frac*(c.Lat-a.Lat), a.Lon+frac*(c.Lon-a.Lon)
		// metres on the sphere of radius 6371 km: plenty for a 1 cm check
		dn := (b.StationLatDeg - lat) * math.Pi / 180 * 6371e3
		de := (b.StationLonDeg - lon) * math.Pi / 180 * 6371e3 * math.Cos(lat*math.Pi/180)
		e := math.Hypot(dn, de)
		worst = max(worst, e)
		t.Logf("bearing %d at %s: %.7f, %.7f; gpsd's TPVs interpolated %.7f, %.7f: %.2g m apart", i+1, mid.Format("15:04:05.000"), b.StationLatDeg, b.StationLonDeg, lat, lon, e)
		if e > 0.01 {
			t.Errorf("bearing %d is stamped %.3f m from gpsd's position at the burst's middle", i+1, e)
		}
	}
	t.Logf("worst position error against gpsd: %.2g m", worst)
	if n := strings.Count(out, "no position at"); n != 1 {
		t.Errorf("the lost position was reported %d times, want once", n)
	}
	if !strings.Contains(out, "has fixes again") {
		t.Error("the position's return was not reported")
	}
	integrityCheck(t, db.Path())
}
