package survey

import (
	"strings"
	"testing"

	"github.com/spf13/pflag"

	"nullseek/receiver"
)

// TestFlagGroups: the flag groups take their defaults from the owning
// package's defaults value (receiver.DefaultConfig, DefaultHeadingFlags),
// Config and SourceFor read which flags were given from the flag set
// (pflag's Changed), and Turning makes TurningMergeGapS the given merge gap.
func TestFlagGroups(t *testing.T) {
	var j Job
	fs := pflag.NewFlagSet("t", pflag.ContinueOnError)
	j.Input.Add(fs)
	j.Idents.Add(fs)
	j.Headings.Add(fs)
	if j.Input.Receiver != receiver.DefaultConfig {
		t.Errorf("receiver flag defaults %+v, want receiver.DefaultConfig", j.Input.Receiver)
	}
	if j.Headings.Ref != DefaultHeadingFlags().Ref || j.Headings.Bearing.Antenna != DefaultBearingOptions.Antenna {
		t.Errorf("heading flag defaults %+v", j.Headings)
	}
	if err := fs.Parse([]string{"--channel-rate", "0", "--declination", "3", "--ids", "@no-such-list.txt"}); err != nil {
		t.Fatal(err)
	}
	if _, _, err := j.Input.Config(); err == nil || err.Error() != "--channel-rate 0: give a positive value" {
		t.Errorf("--channel-rate 0: %v", err)
	}
	if _, err := j.Idents.Options(); err == nil || !strings.HasPrefix(err.Error(), "--ids: ") {
		t.Errorf("--ids @missing: %v", err)
	}
	if _, err := j.Headings.SourceFor(nil, &strings.Builder{}); err != nil || !j.Headings.DeclinationSet || j.Headings.MountOffsetGiven {
		t.Errorf("SourceFor: %v, declination given %v, mount offset given %v (want true, false)", err, j.Headings.DeclinationSet, j.Headings.MountOffsetGiven)
	}
	if err := fs.Set("channel-rate", "12000"); err != nil {
		t.Fatal(err)
	}
	j.Input.Turning()
	cfg, _, err := j.Input.Config()
	if err != nil || cfg.MergeGapS != TurningMergeGapS || !j.Input.MergeGapGiven {
		t.Errorf("Turning: merge gap %v (given %v), %v; want %v", cfg.MergeGapS, j.Input.MergeGapGiven, err, TurningMergeGapS)
	}
}
