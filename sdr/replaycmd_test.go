package sdr

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// TestRawFlags: the raw-recording flags' refusals name the flag; hertz
// values take the SI prefixes of units.ParseHz (BIPM SI brochure, table 7)
// and --start is RFC 3339 (IETF RFC 3339, §5.6).
func TestRawFlags(t *testing.T) {
	p, err := RawFlags{Rate: "2.4M", Center: "433.9MHz", Format: "cu8", Start: "2026-05-01T12:00:00+02:00"}.Params()
	if err != nil || p.SampleRate != 2.4e6 || p.CenterHz != 433.9e6 || p.Format != "cu8" || p.Start.Hour() != 10 || p.Start.Location().String() != "UTC" {
		t.Errorf("Params: %+v %v", p, err)
	}
	for _, c := range []struct {
		f    RawFlags
		want string
	}{{RawFlags{Rate: "fast"}, "--rate"}, {RawFlags{Center: "x"}, "--center"}, {RawFlags{Start: "yesterday"}, "--start"}} {
		if _, err := c.f.Params(); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%+v: %v, want %q", c.f, err, c.want)
		}
	}
}

// A bad replay request is one line naming the flag or the file, and no
// server: nothing is announced.
func TestReplayRefusals(t *testing.T) {
	raw := filepath.Join(t.TempDir(), "x.cu8")
	if err := os.WriteFile(raw, make([]byte, 1000), 0o644); err != nil {
		t.Fatal(err)
	}
	cu8 := RawFlags{Rate: "250k", Format: "cu8"}
	for _, tc := range []struct {
		mod  func(*ReplayRequest)
		want string
	}{
		{func(r *ReplayRequest) { r.Listen = "0.0.0.0:0" }, "--listen: replay address \"0.0.0.0:0\" (0.0.0.0) is not a loopback address"},
		{func(r *ReplayRequest) { r.Listen = "localhost" }, "--listen: replay address \"localhost\": want HOST:PORT"},
		{func(r *ReplayRequest) { r.Speed = -2 }, "--speed -2"},
		{func(r *ReplayRequest) { r.Raw.Rate = "" }, "--rate"},
		{func(r *ReplayRequest) { r.Raw.Rate = "fast" }, "--rate"},
		{func(r *ReplayRequest) { r.Path = filepath.Join(t.TempDir(), "none.sigmf-meta"); r.Raw = RawFlags{} }, "none.sigmf-meta"},
	} {
		var log logBuf
		r := DefaultReplayRequest()
		r.Path, r.Raw, r.Listen, r.Logger = raw, cu8, "127.0.0.1:0", log.logger()
		tc.mod(&r)
		err := Replay(context.Background(), r)
		if err == nil || !strings.Contains(err.Error(), tc.want) || strings.Contains(err.Error(), "\n") ||
			strings.Contains(tc.want, "loopback") && !strings.HasSuffix(err.Error(), "with --allow-remote") {
			t.Errorf("%+v: err %v, want one line with %q", r, err, tc.want)
		}
		if strings.Contains(log.String(), "replaying") {
			t.Errorf("%+v: served anyway: %q", r, log.String())
		}
	}
}

// Cancelling the context ends a waiting replay with nil and a "replay
// stopped" line, after the announcement naming the recording's rate,
// format and centre.
func TestReplayStops(t *testing.T) {
	raw := filepath.Join(t.TempDir(), "x.cu8")
	if err := os.WriteFile(raw, make([]byte, 1000), 0o644); err != nil {
		t.Fatal(err)
	}
	var log logBuf
	r := DefaultReplayRequest()
	r.Path, r.Raw, r.Listen, r.Logger = raw, RawFlags{Rate: "250k", Format: "cu8", Center: "433.92M"}, "127.0.0.1:0", log.logger()
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- Replay(ctx, r) }()
	for !strings.Contains(log.String(), "replaying") {
		select {
		case err := <-done:
			t.Fatalf("ended before serving: %v\n%s", err, log.String())
		case <-time.After(10 * time.Millisecond):
		}
	}
	cancel()
	if err := <-done; err != nil {
		t.Fatalf("cancelled replay: %v", err)
	}
	if s := log.String(); !strings.Contains(s, "(250000 S/s cu8, centre 433920000 Hz) on rtl_tcp 127.0.0.1:") || !strings.Contains(s, "replay stopped") {
		t.Errorf("log %q", s)
	}
}
