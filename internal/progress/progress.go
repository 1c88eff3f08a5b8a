// Package progress draws a progress bar on a terminal (schollz/progressbar
// v3) and is silent everywhere else: a pipe, a file or a test's buffer
// never receives one.
package progress

import (
	"io"
	"os"
	"time"

	"github.com/schollz/progressbar/v3"
	"golang.org/x/term"
)

// Terminal is w when it is a terminal (golang.org/x/term), else nil.
func Terminal(w io.Writer) *os.File {
	if f, ok := w.(*os.File); ok && term.IsTerminal(int(f.Fd())) {
		return f
	}
	return nil
}

// Bar returns a callback that sets the count of a bar of total steps
// drawn on w, labelled label, and the function that ends it; both are
// no-ops when w is not a terminal or total is not known (≤ 0).
func Bar(w io.Writer, total int64, label string) (set func(int64), done func()) {
	tty := Terminal(w)
	if total <= 0 || tty == nil {
		return func(int64) {}, func() {}
	}
	bar := progressbar.NewOptions64(total,
		progressbar.OptionSetWriter(tty),
		progressbar.OptionSetDescription(label),
		progressbar.OptionShowCount(),
		progressbar.OptionThrottle(100*time.Millisecond),
		progressbar.OptionClearOnFinish(),
	)
	return func(n int64) { _ = bar.Set64(n) }, func() { _ = bar.Finish() }
}
