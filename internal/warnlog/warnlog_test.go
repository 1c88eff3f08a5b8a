package warnlog

import (
	"bytes"
	"log/slog"
	"strings"
	"testing"
)

// TestFormat: one line per record in the command's style; values quoted
// where log/slog's own TextHandler (Go standard library) quotes them, so
// the line reads back the same way.
func TestFormat(t *testing.T) {
	var b bytes.Buffer
	log := New(&b, "nullseek")
	log.Info("not shown")
	log.Debug("not shown either")
	log.Warn("heading: skipped NMEA lines", "source", "h.nmea", "skipped", 3, "summary", "2 garbage (lines 4, 9)")
	log.With("rotator", "127.0.0.1:4533").WithGroup("poll").Error("no answer", "after_s", 2.5, "reply", "")
	log.Warn("grouped", slog.Group("g", "a", 1, "b", "x=y"))
	want := "nullseek: warning: heading: skipped NMEA lines source=h.nmea skipped=3 summary=\"2 garbage (lines 4, 9)\"\n" +
		"nullseek: error: no answer rotator=127.0.0.1:4533 poll.after_s=2.5 poll.reply=\"\"\n" +
		"nullseek: warning: grouped g.a=1 g.b=\"x=y\"\n"
	if b.String() != want {
		t.Errorf("got\n%s\nwant\n%s", b.String(), want)
	}
	// The values quoted here are the ones TextHandler quotes.
	var tb bytes.Buffer
	slog.New(slog.NewTextHandler(&tb, nil)).Warn("m", "summary", "2 garbage (lines 4, 9)", "reply", "", "b", "x=y", "source", "h.nmea")
	for _, s := range []string{`summary="2 garbage (lines 4, 9)"`, `reply=""`, `b="x=y"`, `source=h.nmea`} {
		if !strings.Contains(tb.String(), s) {
			t.Errorf("TextHandler writes %q, not %s", tb.String(), s)
		}
	}
}

// TestNewProgress: Info records are written as plain lines, warnings keep
// their kind word, Debug is dropped.
func TestNewProgress(t *testing.T) {
	var b strings.Builder
	l := NewProgress(&b, "nullseek")
	l.Debug("hidden")
	l.Info("client connected", "remote", "127.0.0.1:5")
	l.Warn("slow")
	want := "nullseek: client connected remote=127.0.0.1:5\nnullseek: warning: slow\n"
	if b.String() != want {
		t.Errorf("got %q, want %q", b.String(), want)
	}
}
