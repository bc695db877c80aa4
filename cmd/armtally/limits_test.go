package main

import (
	"os"
	"strings"
	"testing"
	"time"
)

// TestSegmentLimitExit checks the limit of distinct values per segment
// column from the command line: the demo log's unit column has about
// 20,000 values and its platform column 3 (web, ios, android, by
// construction of the demo scenario). Before the limit, --segment user_id
// ran for minutes and wrote a readout with a table row per unit.
func TestSegmentLimitExit(t *testing.T) {
	for _, tc := range []struct {
		args []string
		code int
		want string
	}{
		{[]string{"--segment", "user_id"}, exitData, `segment "user_id" has more than 100 distinct values`},
		{[]string{"--segment", "platform", "--max-segment-values", "2"}, exitData, `segment "platform" has more than 2 distinct values`},
		{[]string{"--segment", "platform", "--max-segment-values", "3"}, exitOK, ""},
		{[]string{"--segment", "platform", "--max-segment-values", "0"}, exitUsage, "--max-segment-values: 0: want 1 to 100000"},
	} {
		start := time.Now()
		code, _, stderr := runCmd(t, append([]string{"analyze", "--demo"}, tc.args...)...)
		if code != tc.code || !strings.Contains(stderr, tc.want) {
			t.Errorf("%v: exit %d, stderr %q; want exit %d and %q", tc.args, code, stderr, tc.code, tc.want)
		}
		if d := time.Since(start); d > 30*time.Second {
			t.Errorf("%v: took %v", tc.args, d)
		}
	}
}

// TestSpecDevZero checks that --spec naming a device that never ends
// fails at once with a message naming it, instead of reading until the
// memory runs out.
func TestSpecDevZero(t *testing.T) {
	if _, err := os.Stat("/dev/zero"); err != nil {
		t.Skip("no /dev/zero here")
	}
	code, _, stderr := runCmd(t, "analyze", "--spec", "/dev/zero")
	if want := "/dev/zero: the file is larger than 4 MiB"; code != exitUsage || !strings.Contains(stderr, want) {
		t.Errorf("exit %d, stderr %q; want exit %d and %q", code, stderr, exitUsage, want)
	}
}
