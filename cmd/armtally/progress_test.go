package main

import (
	"bytes"
	"io"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"
)

// The expected strings below are worked out by hand from the inputs. The
// SI prefixes k = 10^3, M = 10^6, G = 10^9, T = 10^12 and the grouping of
// digits in threes with commas are common practice.

// syncBuffer is a writer the test can read while the progress goroutine
// writes to it; each write is also signalled on wrote.
type syncBuffer struct {
	mu    sync.Mutex
	buf   bytes.Buffer
	wrote chan struct{}
}

func newSyncBuffer() *syncBuffer { return &syncBuffer{wrote: make(chan struct{}, 1)} }

func (b *syncBuffer) Write(p []byte) (int, error) {
	b.mu.Lock()
	defer b.mu.Unlock()
	select {
	case b.wrote <- struct{}{}:
	default:
	}
	return b.buf.Write(p)
}

func (b *syncBuffer) String() string {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.buf.String()
}

// fakeClock returns start plus one second more at each call, safely from
// several goroutines.
func fakeClock(start time.Time) func() time.Time {
	var calls atomic.Int64
	return func() time.Time { return start.Add(time.Duration(calls.Add(1)-1) * time.Second) }
}

// waitFor waits until w holds s, failing the test after 5s.
func waitFor(t *testing.T, w *syncBuffer, s string) {
	t.Helper()
	timeout := time.After(5 * time.Second)
	for !strings.Contains(w.String(), s) {
		select {
		case <-w.wrote:
		case <-timeout:
			t.Fatalf("no %q within 5s; output %q", s, w.String())
		}
	}
}

func TestStartProgressDrawsAndStops(t *testing.T) {
	w := newSyncBuffer()
	var rows atomic.Int64
	rows.Store(2_000_000)
	stop := startProgress(w, rows.Load, time.Millisecond, fakeClock(time.Unix(0, 0)))
	waitFor(t, w, "reading: 2,000,000 rows")
	rows.Store(5_000_000)
	waitFor(t, w, "reading: 5,000,000 rows")
	stop()
	stop() // a second call is harmless

	out := w.String()
	// The first call of the clock is the start, the first draw one second
	// after it: 2e6 rows in 1s.
	first := "\rreading: 2,000,000 rows, 2.00M rows/s, 1s"
	if !strings.HasPrefix(out, first) {
		t.Errorf("output %q does not start with %q", out, first)
	}
	// Every line starts with '\r' and none ends with a newline: the
	// lines are drawn over each other.
	if strings.Contains(out, "\n") {
		t.Errorf("output %q has a newline", out)
	}
	// The last write blanks the widest line drawn and returns to its start.
	lines := strings.Split(out, "\r")
	width := 0
	for _, l := range lines[1 : len(lines)-2] {
		width = max(width, len(l))
	}
	wantEnd := "\r" + strings.Repeat(" ", width) + "\r"
	if width == 0 || !strings.HasSuffix(out, wantEnd) {
		t.Errorf("output %q does not end by blanking %d columns", out, width)
	}

	// stop returned after the goroutine exited: nothing more is written.
	time.Sleep(20 * time.Millisecond)
	if got := w.String(); got != out {
		t.Errorf("written after stop: %q", strings.TrimPrefix(got, out))
	}
}

func TestStartProgressStopBeforeFirstLine(t *testing.T) {
	w := newSyncBuffer()
	stop := startProgress(w, func() int64 { return 1 }, time.Hour, time.Now)
	stop()
	if got := w.String(); got != "" {
		t.Errorf("stop before the first interval wrote %q, want nothing", got)
	}
}

func TestIsTerminal(t *testing.T) {
	f, err := os.Create(filepath.Join(t.TempDir(), "stderr.txt"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var nilFile *os.File
	for _, tc := range []struct {
		name string
		w    io.Writer
	}{
		{"buffer", &bytes.Buffer{}},
		{"regular file", f},
		{"nil file", nilFile},
	} {
		if isTerminal(tc.w) {
			t.Errorf("isTerminal(%s) = true, want false", tc.name)
		}
	}
}

// Commands run by the tests write stderr to a buffer, so a run never shows
// progress unless a test turns it on.
func TestParseAnalyzeProgress(t *testing.T) {
	for _, args := range [][]string{{"--demo"}, {"--demo", "--no-progress"}} {
		var out, errOut bytes.Buffer
		run, err := parseAnalyze(args, &out, &errOut)
		if err != nil {
			t.Fatalf("%v: %v", args, err)
		}
		if run.progress || run.stderr != &errOut {
			t.Errorf("%v: progress %v, stderr set %v; want false, true", args, run.progress, run.stderr == &errOut)
		}
	}
	code, stdout, _ := runCmd(t, "analyze", "--help")
	if code != exitOK || !strings.Contains(stdout, "--no-progress") {
		t.Errorf("analyze --help: exit %d, no --no-progress in %q", code, stdout)
	}
}
