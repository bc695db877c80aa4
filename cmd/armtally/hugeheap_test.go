package main

import "testing"

// TestHugeHeapSize holds the sizing rule of hugeHeapSize (common
// practice: this project's own choice, measured in cmd/bench/BENCHMARKS.md).
func TestHugeHeapSize(t *testing.T) {
	const mib, gib = int64(1) << 20, int64(1) << 30
	for _, c := range []struct {
		name            string
		input, physical int64
		want            int64
	}{
		{"nothing to read", 0, 24 * gib, 0},
		{"small input", 16*mib - 1, 24 * gib, 0},
		{"three times the input", 100 * mib, 24 * gib, 300 * mib},
		{"at most 2 GiB", 710 * mib, 24 * gib, 2 * gib},
		{"at most an eighth of memory", 710 * mib, 8 * gib, 1 * gib},
		{"memory unknown", 100 * mib, 0, 300 * mib},
		{"no overflow", 1 << 62, 24 * gib, 2 * gib},
	} {
		if got := hugeHeapSize(c.input, c.physical); got != c.want {
			t.Errorf("%s: hugeHeapSize(%d, %d) = %d, want %d", c.name, c.input, c.physical, got, c.want)
		}
	}
}
