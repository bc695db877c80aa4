package main

import (
	"bytes"
	"fmt"
	"os"
	"os/exec"
	"slices"
	"strings"
	"time"
)

// sample is one measured run of a child process.
type sample struct {
	Wall   time.Duration
	MaxRSS int64 // peak resident set size in bytes (rusage ru_maxrss)
	User   time.Duration
	Sys    time.Duration
}

// timeBin is GNU time, which runs each measured child. The children are
// not started directly: Go starts a child with vfork semantics (CLONE_VM),
// and Linux then carries the parent's peak resident size over into the
// child's ru_maxrss at exec, so every child would report at least the
// bench's own peak. GNU time forks a small process of its own, so the
// child's ru_maxrss is its own.
const timeBin = "/usr/bin/time"

// runChild runs name with args as a child process under GNU time and
// returns its wall time (measured here, around GNU time), peak resident
// memory and CPU times (from GNU time), with its standard output. A
// non-zero exit is an error that quotes the end of its standard error.
func runChild(name string, args []string) (sample, []byte, error) {
	rf, err := os.CreateTemp("", "bench-rusage-*")
	if err != nil {
		return sample{}, nil, fmt.Errorf("run %s: %w", name, err)
	}
	rf.Close()
	defer os.Remove(rf.Name())
	cmd := exec.Command(timeBin, append([]string{"-f", "%M %U %S", "-o", rf.Name(), "--", name}, args...)...)
	var stdout, stderr bytes.Buffer
	cmd.Stdout, cmd.Stderr = &stdout, &stderr
	start := time.Now()
	err = cmd.Run()
	wall := time.Since(start)
	if err != nil {
		msg := strings.TrimSpace(stderr.String())
		if len(msg) > 2000 {
			msg = "..." + msg[len(msg)-2000:]
		}
		return sample{}, nil, fmt.Errorf("%s %s: %w\n%s", name, strings.Join(args, " "), err, msg)
	}
	usage, err := os.ReadFile(rf.Name())
	if err != nil {
		return sample{}, nil, fmt.Errorf("run %s: %w", name, err)
	}
	var kb int64
	var user, sys float64
	if _, err := fmt.Sscanf(string(usage), "%d %f %f", &kb, &user, &sys); err != nil {
		return sample{}, nil, fmt.Errorf("run %s: GNU time printed %q: %w", name, usage, err)
	}
	s := sample{
		Wall:   wall,
		MaxRSS: kb * 1024, // GNU time reports kilobytes (KiB)
		User:   time.Duration(user * float64(time.Second)),
		Sys:    time.Duration(sys * float64(time.Second)),
	}
	return s, stdout.Bytes(), nil
}

// stats summarises the samples of one measured command.
type stats struct {
	Runs       int
	Wall       time.Duration // median
	WallMin    time.Duration
	WallMax    time.Duration
	MaxRSS     int64 // median
	CPU        time.Duration
	RSSSamples []int64
}

// summarise returns the medians (and the range of wall times) of samples.
func summarise(samples []sample) stats {
	if len(samples) == 0 {
		return stats{}
	}
	walls := make([]time.Duration, len(samples))
	cpus := make([]time.Duration, len(samples))
	rss := make([]int64, len(samples))
	for i, s := range samples {
		walls[i], cpus[i], rss[i] = s.Wall, s.User+s.Sys, s.MaxRSS
	}
	st := stats{Runs: len(samples), RSSSamples: slices.Clone(rss)}
	slices.Sort(walls)
	slices.Sort(cpus)
	slices.Sort(rss)
	st.Wall, st.WallMin, st.WallMax = median(walls), walls[0], walls[len(walls)-1]
	st.CPU = median(cpus)
	st.MaxRSS = median(rss)
	return st
}

// median returns the median of sorted xs (the mean of the middle two for
// an even count).
func median[T ~int64](xs []T) T {
	n := len(xs)
	if n%2 == 1 {
		return xs[n/2]
	}
	return (xs[n/2-1] + xs[n/2]) / 2
}
