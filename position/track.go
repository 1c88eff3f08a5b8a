package position

import (
	"errors"
	"fmt"
	"sort"
	"sync"
	"time"

	"nullseek/internal/geodesic"
)

// Track defaults.
const (
	// DefaultStaleness is how far from its nearest fix a time may lie and
	// still be answered by holding that fix (before the first fix, after
	// the last, or inside a gap too long to interpolate). 5 s is about
	// five epochs of a 1 Hz receiver (common practice), 140 m at 100 km/h.
	DefaultStaleness = 5 * time.Second
	// DefaultMaxGap is the longest interval between two fixes that is
	// interpolated. Over a longer gap (a tunnel, a lost link) the path is
	// unknown: a straight geodesic could cut corners by more than a
	// bearing can bear, so only times within the staleness of either end
	// are answered.
	DefaultMaxGap = 10 * time.Second
)

// Errors a caller may want to tell apart (test with errors.Is).
var (
	// ErrStale: no fix is near enough in time to say where the station
	// was (the track is empty, or the time is further than the staleness
	// from every fix it could use).
	ErrStale = errors.New("position: no fix near enough in time")
	// ErrNoFix: a fix without a 2D/3D position, a time, or with values out
	// of range, refused by Track.Add.
	ErrNoFix = errors.New("position: not a usable fix")
	// ErrOutOfOrder: a fix earlier than the track's last, refused by
	// Track.Add (a source replaying, or a receiver's clock jumping back).
	ErrOutOfOrder = errors.New("position: fix earlier than the track's last")
)

// Track is a time-ordered list of fixes that answers "where was the
// station at t?". Safe for one writer and any number of readers at once.
// Set Staleness and MaxGap before the first At; zero means the default.
type Track struct {
	// Staleness: see DefaultStaleness.
	Staleness time.Duration
	// MaxGap: see DefaultMaxGap.
	MaxGap time.Duration

	mu    sync.RWMutex
	fixes []Fix
}

// Add appends f. A fix at the same time as the last replaces it (two
// reports of one epoch); an earlier one is refused with ErrOutOfOrder and
// an unusable one with ErrNoFix. Times are kept in UTC.
func (t *Track) Add(f Fix) error {
	if err := f.Usable(); err != nil {
		return err
	}
	f.Time = f.Time.UTC()
	f.Held = 0
	t.mu.Lock()
	defer t.mu.Unlock()
	if n := len(t.fixes); n > 0 {
		last := t.fixes[n-1].Time
		switch {
		case f.Time.Equal(last):
			t.fixes[n-1] = f
			return nil
		case f.Time.Before(last):
			return fmt.Errorf("%w: %s after %s", ErrOutOfOrder, f.Time.Format(time.RFC3339Nano), last.Format(time.RFC3339Nano))
		}
	}
	t.fixes = append(t.fixes, f)
	return nil
}

// Len returns the number of fixes kept.
func (t *Track) Len() int {
	t.mu.RLock()
	defer t.mu.RUnlock()
	return len(t.fixes)
}

// Fixes returns a copy of the fixes kept, oldest first.
func (t *Track) Fixes() []Fix {
	t.mu.RLock()
	defer t.mu.RUnlock()
	return append([]Fix(nil), t.fixes...)
}

// Trim drops the fixes before t except the last one before it (so At(t)
// still interpolates), bounding memory on a long run.
func (t *Track) Trim(before time.Time) {
	t.mu.Lock()
	defer t.mu.Unlock()
	i := sort.Search(len(t.fixes), func(i int) bool { return !t.fixes[i].Time.Before(before) })
	if i > 1 {
		t.fixes = append(t.fixes[:0], t.fixes[i-1:]...)
	}
}

func (t *Track) limits() (stale, gap time.Duration) {
	stale, gap = t.Staleness, t.MaxGap
	if stale <= 0 {
		stale = DefaultStaleness
	}
	if gap <= 0 {
		gap = DefaultMaxGap
	}
	return stale, gap
}

// At returns where the station was at when, with Time set to when:
//
//   - at a fix's time, that fix;
//   - between two fixes at most MaxGap apart, the point at the same
//     fraction of time along the WGS84 geodesic between them (Karney 2013,
//     through internal/geodesic), altitudes linear when both have one;
//     mode, quality, HDOP and error estimate are those of the worse end
//     (an interpolated point is no better than either);
//   - otherwise, when the nearest usable fix is within Staleness, that fix
//     held, with Held saying how far away it is (no dead reckoning: a
//     velocity extrapolated from two noisy fixes is not trusted);
//   - otherwise ErrStale, naming the nearest fix's distance in time.
//
// Constant speed along the geodesic over one step is the assumption; for
// 1 Hz fixes of a vehicle its error is far below a GNSS fix's own.
func (t *Track) At(when time.Time) (Fix, error) {
	stale, maxGap := t.limits()
	t.mu.RLock()
	defer t.mu.RUnlock()
	n := len(t.fixes)
	if n == 0 {
		return Fix{}, fmt.Errorf("%w: the track has no fix yet", ErrStale)
	}
	// i is the first fix at or after when.
	i := sort.Search(n, func(i int) bool { return !t.fixes[i].Time.Before(when) })
	if i < n && t.fixes[i].Time.Equal(when) {
		f := t.fixes[i]
		f.Time = when.UTC()
		return f, nil
	}
	if i > 0 && i < n {
		a, b := t.fixes[i-1], t.fixes[i]
		if gap := b.Time.Sub(a.Time); gap <= maxGap {
			return interpolate(a, b, when), nil
		}
	}
	// Hold the nearest fix, if near enough.
	best, dist := -1, time.Duration(0)
	for _, j := range []int{i - 1, i} {
		if j < 0 || j >= n {
			continue
		}
		d := when.Sub(t.fixes[j].Time).Abs()
		if best < 0 || d < dist {
			best, dist = j, d
		}
	}
	if dist > stale {
		return Fix{}, fmt.Errorf("%w: the nearest fix is %v from %s, more than the %v allowed",
			ErrStale, dist.Round(time.Millisecond), when.UTC().Format(time.RFC3339Nano), stale)
	}
	f := t.fixes[best]
	f.Time, f.Held = when.UTC(), dist
	return f, nil
}

// interpolate returns the point at when's fraction of the a→b interval
// along the geodesic from a to b.
func interpolate(a, b Fix, when time.Time) Fix {
	frac := float64(when.Sub(a.Time)) / float64(b.Time.Sub(a.Time))
	s12, azi1, _ := geodesic.Inverse(a.LatDeg, a.LonDeg, b.LatDeg, b.LonDeg)
	lat, lon, _ := geodesic.Direct(a.LatDeg, a.LonDeg, azi1, frac*s12)
	f := Fix{
		Time:    when.UTC(),
		LatDeg:  lat,
		LonDeg:  lon,
		AltHAEM: lerpPtr(a.AltHAEM, b.AltHAEM, frac),
		AltMSLM: lerpPtr(a.AltMSLM, b.AltMSLM, frac),
		Mode:    min(a.Mode, b.Mode),
		Quality: worseQuality(a.Quality, b.Quality),
		HErrM:   maxPtr(a.HErrM, b.HErrM),
		HDOP:    maxPtr(a.HDOP, b.HDOP),
		Source:  a.Source,
	}
	if b.Source != a.Source {
		f.Source = a.Source + "+" + b.Source
	}
	return f
}

func lerpPtr(a, b *float64, frac float64) *float64 {
	if a == nil || b == nil {
		return nil
	}
	return ptr(*a + frac*(*b-*a))
}

// maxPtr is the larger of two estimates, or nil when either is unknown
// (the unknown end might be the worse).
func maxPtr(a, b *float64) *float64 {
	if a == nil || b == nil {
		return nil
	}
	return ptr(max(*a, *b))
}

// worseQuality: GGA qualities are not ordered by number (6 estimated is
// worse than 1 GPS), so two different ones give 0, "not stated".
func worseQuality(a, b int) int {
	if a == b {
		return a
	}
	return 0
}
