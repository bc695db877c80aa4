package experiment

import (
	"fmt"
	"strings"
	"testing"
)

// TestUnitIndex checks that keys are numbered in order of first sight and
// read back exactly across many table growths, including the empty key,
// keys that are prefixes of one another and keys of megabytes.
func TestUnitIndex(t *testing.T) {
	x := newUnitIndex()
	var keys []string
	for i := range 5000 {
		keys = append(keys, fmt.Sprint(i), fmt.Sprint(i)+"x")
	}
	keys = append(keys, "", "\x00", "\x00\x00")
	for i := range 40 { // 40 keys of 100,000 bytes
		keys = append(keys, strings.Repeat(string(rune('a'+i%26)), 99_999)+fmt.Sprint(i%10))
	}
	keys = append(keys, strings.Repeat("z", 3<<20), "after-the-long-one", strings.Repeat("y", 1<<20), "tail")
	for pass := range 2 {
		for i, k := range keys {
			u, seen := x.lookup(k)
			if int(u) != i || seen != (pass == 1) {
				t.Fatalf("pass %d: lookup(%q) = %d, %v; want %d, %v", pass, k, u, seen, i, pass == 1)
			}
		}
	}
	if x.len() != len(keys) {
		t.Fatalf("len = %d, want %d", x.len(), len(keys))
	}
	for i, k := range keys {
		if got := x.keyString(int32(i)); got != k {
			t.Fatalf("key %d = %q, want %q", i, got, k)
		}
	}
	if x.compare(0, 1) >= 0 || x.compare(1, 0) <= 0 || x.compare(2, 2) != 0 {
		t.Fatal("compare disagrees with bytewise order")
	}
}
