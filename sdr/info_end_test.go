package sdr

import (
	"testing"
	"time"
)

// TestInfoEnd: 2.4 MS/s for 6,000,000 samples is 2.5 s; unknown start,
// length or rate gives the zero Time.
func TestInfoEnd(t *testing.T) {
	t0 := time.Date(2026, 5, 1, 10, 0, 0, 0, time.UTC)
	if got := (Info{Start: t0, Samples: 6_000_000, SampleRate: 2.4e6}).End(); !got.Equal(t0.Add(2500 * time.Millisecond)) {
		t.Errorf("End %v", got)
	}
	for _, i := range []Info{{Samples: 10, SampleRate: 1e3}, {Start: t0, Samples: -1, SampleRate: 1e3}, {Start: t0, Samples: 10}} {
		if !i.End().IsZero() {
			t.Errorf("%+v: End %v, want zero", i, i.End())
		}
	}
}
