package receiver

import (
	"math"
	"strings"
	"testing"

	"nullseek/sdr"
)

// TestConfigValidate: every numeric field out of its range (NaN, ±Inf,
// negative, absurd) is refused with one error naming the flag or field;
// the defaults pass; NewScanner refuses what Validate refuses.
func TestConfigValidate(t *testing.T) {
	if err := (Config{}).Validate(); err != nil {
		t.Fatalf("defaults refused: %v", err)
	}
	for _, c := range []struct {
		name string
		cfg  Config
		want string
	}{
		{"nan offset", Config{OffsetHz: math.NaN()}, "--offset"},
		{"inf freq", Config{FreqHz: math.Inf(1)}, "--freq"},
		{"negative channel rate", Config{ChannelRateHz: -48000}, "--channel-rate"},
		{"huge readings", Config{ReadingsPerS: 1e6}, "ReadingsPerS"},
		{"negative false alarms", Config{FalseAlarmsPerHour: -1}, "--false-alarms"},
		{"nan false alarms", Config{FalseAlarmsPerHour: math.NaN()}, "--false-alarms"},
		{"negative min burst", Config{MinBurstS: -0.1}, "--min-burst"},
		{"hour merge gap", Config{MergeGapS: 3600}, "--merge-gap"},
		{"inf join wait", Config{JoinWaitS: math.Inf(1)}, "--join-wait"},
		{"tiny noise average", Config{NoiseAverageS: 0.01}, "NoiseAverageS"},
		{"piece too long", Config{PieceS: 1e4}, "PieceS"},
		{"overlap over half", Config{PieceS: 10, PieceOverlapS: 6}, "PieceOverlapS"},
		{"min burst over a piece", Config{MinBurstS: 30}, "--min-burst"},
		{"negative keep", Config{MaxKeepS: -1}, "MaxKeepS"},
		{"stop under pass", Config{PassHz: 9000, StopHz: 8000}, "StopHz"},
	} {
		err := c.cfg.Validate()
		if err == nil || !strings.Contains(err.Error(), c.want) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: %v, want one line naming %s", c.name, err, c.want)
			continue
		}
		info := sdr.Info{SampleRate: 96000, Name: "test"}
		if _, err := NewScanner(info, c.cfg); err == nil {
			t.Errorf("%s: NewScanner accepted it", c.name)
		}
	}
}
