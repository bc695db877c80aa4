package main

import (
	"fmt"
	"io"
	"os"
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
	line := report.ProgressLine(p.rows(), p.now().Sub(p.start))
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
