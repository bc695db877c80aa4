package experiment

import (
	"fmt"
	"hash/maphash"
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

// With slabs of 64 bytes, keys fill slabs exactly, start the next slab
// when they would straddle two, and are kept on their own when longer
// than a slab; each reads back exactly, is found again, and its last byte
// is what keyTouch reads (common practice: a store must give back what it
// was given).
func TestUnitIndexSlabs(t *testing.T) {
	x := newUnitIndex()
	x.slabBits = 6
	keys := []string{
		strings.Repeat("a", 64),      // fills the first slab exactly (after its doublings)
		"b", strings.Repeat("c", 63), // fill the second exactly
		strings.Repeat("d", 60), strings.Repeat("e", 10), // e starts the fourth slab
		"", strings.Repeat("f", 65), "g", // empty; longer than a slab; after it
		strings.Repeat("h", 64), "\x00", "i", // a full slab after a padded one
	}
	for i := range 200 {
		keys = append(keys, strings.Repeat(string(rune('j'+i%10)), 1+i%70)+fmt.Sprint(i))
	}
	for pass := range 2 {
		for i, k := range keys {
			u, seen := x.lookup(k)
			if int(u) != i || seen != (pass == 1) {
				t.Fatalf("pass %d: lookup(%q) = %d, %v; want %d, %v", pass, k, u, seen, i, pass == 1)
			}
		}
	}
	touched := 0
	for i, k := range keys {
		if got := x.keyString(int32(i)); got != k {
			t.Fatalf("key %d = %q, want %q", i, got, k)
		}
		if k == "" || len(k) > 64 {
			continue
		}
		// The key's first slot names its unit (-1 when a collision put
		// it further on), whose key end and last byte keyTouch reads.
		h := maphash.String(x.seed, k)
		if u := x.unitOf(x.slotOf(h), h); u == int32(i) {
			x.keyTouch(u)
			touched++
		} else if u != -1 {
			t.Fatalf("the first slot of key %d names unit %d", i, u)
		}
	}
	if touched < len(keys)/2 {
		t.Fatalf("first slots named %d of %d units", touched, len(keys))
	}
	if len(x.slabs) < 10 || len(x.big) == 0 {
		t.Fatalf("%d slabs and %d keys on their own: the test did not reach what it checks", len(x.slabs), len(x.big))
	}
	for i, s := range x.slabs {
		if len(s) > 64 {
			t.Fatalf("slab %d holds %d bytes, more than a slab", i, len(s))
		}
	}
}

// growthSizes adds n units to a fresh index, telling it share(i) before
// unit i, checks that every key is found again as its unit, and returns
// the table sizes it grew to from minProjectedSlots on.
func growthSizes(t *testing.T, n int, share func(i int) float64) []int {
	t.Helper()
	x := newUnitIndex()
	var sizes []int
	for i := range n {
		x.share = share(i)
		before := len(x.slots)
		if u, seen := x.lookup(fmt.Sprintf("unit-%07d", i)); int(u) != i || seen {
			t.Fatalf("unit %d: lookup = %d, %v", i, u, seen)
		}
		if len(x.slots) != before && before >= minProjectedSlots {
			sizes = append(sizes, len(x.slots))
		}
	}
	for i := 0; i < n; i += 997 {
		if u, seen := x.lookup(fmt.Sprintf("unit-%07d", i)); int(u) != i || !seen {
			t.Fatalf("unit %d found again as %d, %v", i, u, seen)
		}
	}
	return sizes
}

// A unit index told the share of its input read grows by projection only
// when two projections agree: with units spread evenly over the input it
// reaches the table that doubling ends at in fewer steps; with units
// arriving ever more slowly (a share growing as the square of the units)
// or none told, it doubles; with units that stop early it may overshoot,
// by at most maxGrowStep at once (the bound, common practice for capacity
// hints). Every key is found again in each case.
func TestUnitIndexGrowsByProjection(t *testing.T) {
	const n = 300_000
	doubling := growthSizes(t, n, func(int) float64 { return 0 })
	if want := []int{1 << 17, 1 << 18, 1 << 19}; fmt.Sprint(doubling) != fmt.Sprint(want) {
		t.Fatalf("without a share: sizes %v, want %v", doubling, want)
	}
	final := doubling[len(doubling)-1]
	cases := []struct {
		name  string
		share func(i int) float64
		check func(sizes []int) error
	}{
		{"even", func(i int) float64 { return float64(i+1) / n }, func(sizes []int) error {
			if len(sizes) >= len(doubling) || sizes[len(sizes)-1] != final {
				return fmt.Errorf("sizes %v, want fewer steps than %v to the same table", sizes, doubling)
			}
			return nil
		}},
		{"slowing", func(i int) float64 { f := float64(i+1) / n; return f * f }, func(sizes []int) error {
			if fmt.Sprint(sizes) != fmt.Sprint(doubling) {
				return fmt.Errorf("sizes %v, want doubling's %v", sizes, doubling)
			}
			return nil
		}},
		{"stopping-early", func(i int) float64 { return 0.25 * float64(i+1) / n }, func(sizes []int) error {
			for k, s := range sizes {
				prev := minProjectedSlots
				if k > 0 {
					prev = sizes[k-1]
				}
				if s > maxGrowStep*prev {
					return fmt.Errorf("sizes %v: a step beyond %dx", sizes, maxGrowStep)
				}
			}
			if last := sizes[len(sizes)-1]; last <= final {
				return fmt.Errorf("sizes %v: no overshoot past %d; the case does not test the bound", sizes, final)
			}
			return nil
		}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if err := c.check(growthSizes(t, n, c.share)); err != nil {
				t.Error(err)
			}
		})
	}
}
