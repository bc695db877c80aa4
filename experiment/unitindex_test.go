package experiment

import (
	"fmt"
	"testing"
)

// TestUnitIndex checks that keys are numbered in order of first sight and
// read back exactly across many table growths, including the empty key
// and keys that are prefixes of one another.
func TestUnitIndex(t *testing.T) {
	x := newUnitIndex()
	var keys []string
	for i := range 5000 {
		keys = append(keys, fmt.Sprint(i), fmt.Sprint(i)+"x")
	}
	keys = append(keys, "", "\x00", "\x00\x00")
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
