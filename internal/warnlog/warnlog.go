// Package warnlog is the log/slog handler of the command line: a record
// at Warn level or above becomes one line in the command's own error
// style, "PREFIX: warning: MESSAGE key=value ..." ("error" in place of
// "warning" at Error level and above), with no time stamp; records below
// Warn are dropped (NewProgress keeps Info records too, as plain
// "PREFIX: MESSAGE ..." lines, for a command whose job is to report as it
// runs). Attribute values are written as slog's TextHandler
// writes them (quoted when they hold spaces, quotes or '='); groups
// prefix their keys with "GROUP.".
package warnlog

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"strconv"
	"strings"
	"sync"
	"unicode"
)

// New returns a logger writing to w with prefix (the program's name).
func New(w io.Writer, prefix string) *slog.Logger {
	return slog.New(&handler{w: w, prefix: prefix, mu: new(sync.Mutex), min: slog.LevelWarn})
}

// NewProgress is New that also writes Info records, without a kind word.
func NewProgress(w io.Writer, prefix string) *slog.Logger {
	return slog.New(&handler{w: w, prefix: prefix, mu: new(sync.Mutex), min: slog.LevelInfo})
}

type handler struct {
	w      io.Writer
	prefix string
	mu     *sync.Mutex // shared by the handlers derived from one New
	attrs  string      // preformatted attributes of WithAttrs
	group  string      // key prefix of WithGroup, "" or "a.b."
	min    slog.Level  // the lowest level written
}

func (h *handler) Enabled(_ context.Context, l slog.Level) bool { return l >= h.min }

func (h *handler) Handle(_ context.Context, r slog.Record) error {
	var b strings.Builder
	kind := "warning"
	if r.Level >= slog.LevelError {
		kind = "error"
	}
	if r.Level < slog.LevelWarn {
		fmt.Fprintf(&b, "%s: %s", h.prefix, r.Message)
	} else {
		fmt.Fprintf(&b, "%s: %s: %s", h.prefix, kind, r.Message)
	}
	b.WriteString(h.attrs)
	r.Attrs(func(a slog.Attr) bool {
		writeAttr(&b, h.group, a)
		return true
	})
	b.WriteByte('\n')
	h.mu.Lock()
	defer h.mu.Unlock()
	_, err := io.WriteString(h.w, b.String())
	return err
}

func (h *handler) WithAttrs(as []slog.Attr) slog.Handler {
	var b strings.Builder
	for _, a := range as {
		writeAttr(&b, h.group, a)
	}
	h2 := *h
	h2.attrs += b.String()
	return &h2
}

func (h *handler) WithGroup(name string) slog.Handler {
	if name == "" {
		return h
	}
	h2 := *h
	h2.group += name + "."
	return &h2
}

// writeAttr writes " key=value", a group's attributes each in turn.
func writeAttr(b *strings.Builder, group string, a slog.Attr) {
	v := a.Value.Resolve()
	if v.Kind() == slog.KindGroup {
		g := group
		if a.Key != "" {
			g += a.Key + "."
		}
		for _, ga := range v.Group() {
			writeAttr(b, g, ga)
		}
		return
	}
	if a.Equal(slog.Attr{}) {
		return
	}
	b.WriteByte(' ')
	b.WriteString(group + a.Key)
	b.WriteByte('=')
	b.WriteString(quote(v.String()))
}

// quote quotes s as slog's TextHandler does: when it is empty or holds
// spaces, quotes, '=' or non-printing characters.
func quote(s string) string {
	if s == "" {
		return `""`
	}
	for _, r := range s {
		if unicode.IsSpace(r) || r == '"' || r == '=' || !unicode.IsPrint(r) {
			return strconv.Quote(s)
		}
	}
	return s
}
