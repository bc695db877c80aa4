package main

import (
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/armtally/armtally/report"
)

// progressInterval is how often the progress line is redrawn.
const progressInterval = time.Second

// isTerminal reports whether w is a file open on a character device (a
// terminal), the only place a progress line rewritten with '\r' belongs.
// Buffers, pipes and regular files are not.
func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	if !ok || f == nil {
		return false
	}
	fi, err := f.Stat()
	return err == nil && fi.Mode()&os.ModeCharDevice != 0
}

// progress draws one status line, rewritten in place with '\r'. Only the
// goroutine started by startProgress uses it.
type progress struct {
	w     io.Writer
	rows  func() int64
	now   func() time.Time
	start time.Time
	// width is the widest line drawn so far: a shorter line is padded
	// with spaces to cover it, and erase blanks that many columns.
	width int
}

// startProgress redraws a progress line on w every interval, with the row
// count rows returns, the rate since the start and the elapsed time (as
// now tells it), until stop is called. stop erases the line and returns
// once the drawing goroutine has exited; it may be called more than once.
// Nothing is written when stop comes before the first interval has passed.
// Write errors are ignored: the line is a courtesy, not output.
func startProgress(w io.Writer, rows func() int64, interval time.Duration, now func() time.Time) (stop func()) {
	p := &progress{w: w, rows: rows, now: now, start: now()}
	done := make(chan struct{})
	exited := make(chan struct{})
	go func() {
		defer close(exited)
		t := time.NewTicker(interval)
		defer t.Stop()
		for {
			select {
			case <-t.C:
				p.draw()
			case <-done:
				p.erase()
				return
			}
		}
	}()
	var once sync.Once
	return func() {
		once.Do(func() {
			close(done)
			<-exited
		})
	}
}

// draw writes the current line over the previous one.
func (p *progress) draw() {
	line := progressLine(p.rows(), p.now().Sub(p.start))
	n := len(line)
	if n < p.width {
		line += strings.Repeat(" ", p.width-n)
	}
	p.width = max(p.width, n)
	fmt.Fprint(p.w, "\r"+line)
}

// erase blanks the line drawn last, if any, and returns the cursor to the
// start of it.
func (p *progress) erase() {
	if p.width == 0 {
		return
	}
	fmt.Fprint(p.w, "\r"+strings.Repeat(" ", p.width)+"\r")
	p.width = 0
}

// progressLine is the text of the progress line after elapsed with rows
// read: "reading: 12,345,678 rows, 12.3M rows/s, 1m02s".
func progressLine(rows int64, elapsed time.Duration) string {
	rate := 0.0
	if elapsed > 0 {
		rate = float64(rows) / elapsed.Seconds()
	}
	return "reading: " + report.FormatCount(rows) + " rows, " + formatRate(rate) + " rows/s, " + formatElapsed(elapsed)
}

// formatRate writes a rate per second with three significant digits and an
// SI prefix (k, M, G, T) from 1000 up: 950, 12.3k, 4.56M. A rate that is
// not a positive number is "0".
func formatRate(v float64) string {
	if !(v > 0) {
		return "0"
	}
	const prefixes = " kMGT"
	i := 0
	// 999.5 and up would round to "1000" with the current prefix.
	for v >= 999.5 && i < len(prefixes)-1 {
		v /= 1000
		i++
	}
	if i == 0 {
		return strconv.FormatFloat(v, 'f', 0, 64)
	}
	digits := 0
	switch {
	case v < 9.995:
		digits = 2
	case v < 99.95:
		digits = 1
	}
	return strconv.FormatFloat(v, 'f', digits, 64) + string(prefixes[i])
}

// formatElapsed writes d in whole seconds (rounded down): "7s", "1m02s",
// "1h02m03s". A negative d is "0s".
func formatElapsed(d time.Duration) string {
	s := int64(max(d, 0) / time.Second)
	h, m := s/3600, s/60%60
	s %= 60
	switch {
	case h > 0:
		return fmt.Sprintf("%dh%02dm%02ds", h, m, s)
	case m > 0:
		return fmt.Sprintf("%dm%02ds", m, s)
	}
	return fmt.Sprintf("%ds", s)
}
