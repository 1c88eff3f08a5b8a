package survey

import (
	"nullseek/ident/schedule"
)

// Schedule builds the slot plan of the surveyed recording: transmitters are
// named by identifier, or by fingerprint cluster when unreadable.
func Schedule(res *Result, opts schedule.Options) (*schedule.Plan, error) {
	obs := Observations(res.Records)
	labels := make([]string, len(res.Records))
	for i, r := range res.Records {
		labels[i] = txKey(r)
	}
	if opts.CaptureStart.IsZero() {
		opts.CaptureStart = res.Info.Start
	}
	if opts.CaptureEndS == 0 {
		opts.CaptureEndS = res.Summary.DurationS
	}
	if opts.ListedIDs == nil {
		opts.ListedIDs = res.ListedIDs
	}
	return schedule.Build(obs, labels, opts)
}
