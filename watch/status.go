package watch

import (
	"context"
	"fmt"
	"math"
	"strings"
	"time"

	"nullseek/capture"
)

// showStatus prints the status line every StatusPeriod until ctx ends.
func (w *watcher) showStatus(ctx context.Context) {
	period := w.o.StatusPeriod
	if period <= 0 {
		period = DefaultStatusPeriod
	}
	tick := time.NewTicker(period)
	defer tick.Stop()
	lastWall, lastN := w.now(), w.samples.Load()
	lastCPU, cpuOK := processCPU()
	for {
		select {
		case <-ctx.Done():
			return
		case <-tick.C:
		}
		now, n := w.now(), w.samples.Load()
		cpu, ok := processCPU()
		fmt.Fprintln(w.o.Status, w.statusLine(now, now.Sub(lastWall), n-lastN, cpu-lastCPU, ok && cpuOK))
		lastWall, lastN, lastCPU, cpuOK = now, n, cpu, ok
	}
}

// statusLine is one status line: the sample rate received over the last
// period, how far the stream is behind the wall clock (samples late or
// dropped on the way: a live stream that falls behind loses samples at the
// server), the process's CPU time over wall time (1 = one core busy), the
// input level and each channel's state (channelStatus) — or, while the
// receiver is lost and being redialled, when it was lost — then the
// heading and the rows stored.
func (w *watcher) statusLine(now time.Time, wall time.Duration, samples int64, cpu time.Duration, cpuOK bool) string {
	var b strings.Builder
	fmt.Fprintf(&b, "status %s", now.UTC().Format(time.TimeOnly))
	if wall > 0 {
		fmt.Fprintf(&b, "  %.3f MS/s", float64(samples)/wall.Seconds()/1e6)
	}
	n := w.samples.Load()
	behind := now.Sub(w.info.Start).Seconds() - float64(n)/w.info.SampleRate
	fmt.Fprintf(&b, "  behind %.1f s (%d samples late or dropped)", max(behind, 0), int64(max(behind, 0)*w.info.SampleRate))
	if cpuOK && wall > 0 {
		fmt.Fprintf(&b, "  CPU %.2f", cpu.Seconds()/wall.Seconds())
	}
	if lost := w.lostAt.Load(); lost != 0 {
		// The channels' last states are stale: say what is wrong instead.
		at := time.Unix(0, lost)
		fmt.Fprintf(&b, "  receiver lost at %s (%.0f s ago), reconnecting", at.UTC().Format(time.TimeOnly), now.Sub(at).Seconds())
	} else {
		w.channelStatus(&b)
	}
	w.headingStatus(&b, now)
	st := w.wr.Stats()
	fmt.Fprintf(&b, "  bursts %d, bearings %d, stored %d bursts", w.bursts.Load(), w.bearings.Load(), st.Bursts)
	return b.String()
}

// channelStatus is the status line's input level and channel states, each
// channel named by its frequency: on, with the newest reading's level and
// SNR, while the carrier is up; "on, carrier down" between a keyed burst's
// elements and until the burst is handed over; quiet, with the last
// burst's level and SNR, otherwise.
func (w *watcher) channelStatus(b *strings.Builder) {
	fmt.Fprintf(b, "  input %s", capture.LevelBar(math.Float64frombits(w.inputDB.Load())))
	for _, l := range w.chans {
		fmt.Fprintf(b, "  %s ", l.name())
		if len(w.chans) > 1 {
			n := l.bursts.Load()
			fmt.Fprintf(b, "(%d burst%s) ", n, map[bool]string{true: "", false: "s"}[n == 1])
		}
		if ch := math.Float64frombits(l.channelDB.Load()); !math.IsNaN(ch) {
			fmt.Fprintf(b, "on %.1f dBFS", ch)
			if snr := math.Float64frombits(l.snrDB.Load()); !math.IsNaN(snr) && !math.IsInf(snr, 0) {
				fmt.Fprintf(b, " SNR %.1f dB", snr)
			}
		} else if l.open.Load() {
			b.WriteString("on, carrier down")
		} else {
			b.WriteString("quiet")
			if lb := l.lastBurst.Load(); lb != nil {
				fmt.Fprintf(b, " (last burst %.1f dBFS, SNR %.1f dB)", lb[0], lb[1])
			}
		}
	}
}

// headingStatus is the status line's heading and, for a moving station,
// position.
func (w *watcher) headingStatus(b *strings.Builder, now time.Time) {
	deg, have := w.hs.latest()
	switch {
	case !w.headingOK.Load():
		fmt.Fprintf(b, "  %s: no answer", w.headingSourceShort())
	case have:
		fmt.Fprintf(b, "  %s %.1f°", w.headingSourceShort(), deg)
	}
	if w.pos.moving {
		if f, err := w.pos.src.At(now); err == nil {
			fmt.Fprintf(b, "  at %.5f, %.5f", f.LatDeg, f.LonDeg)
		} else {
			b.WriteString("  position unknown")
		}
	}
}

func (w *watcher) headingSourceShort() string {
	if w.st.Heading.Source == "rotator" {
		return "rotator"
	}
	return "compass"
}
