package main

import "testing"

func TestParseBytes(t *testing.T) {
	// The unit values are the SI and IEC definitions (powers of 1000 and
	// 1024); K, M, G alone as powers of 1024 is common practice.
	for _, c := range []struct {
		in   string
		want int64
		ok   bool
	}{
		{"1", 1, true},
		{"800MB", 800_000_000, true},
		{"1.5GB", 1_500_000_000, true},
		{"2GiB", 2 << 30, true},
		{" 512 KiB ", 512 << 10, true},
		{"3G", 3 << 30, true},
		{"40kB", 40_000, true},
		{"0", 0, false},
		{"0.5B", 0, false},
		{"-1GB", 0, false},
		{"GB", 0, false},
		{"1.2.3MB", 0, false},
		{"10 parsecs", 0, false},
		{"9999999TB", 0, false},
	} {
		got, err := parseBytes(c.in)
		if c.ok && (err != nil || got != c.want) {
			t.Errorf("parseBytes(%q) = %d, %v; want %d", c.in, got, err, c.want)
		}
		if !c.ok && err == nil {
			t.Errorf("parseBytes(%q) = %d, want an error", c.in, got)
		}
	}
}
