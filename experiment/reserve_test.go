package experiment

import (
	"runtime"
	"testing"
)

// TestTallierReservesAsUnitsArrive checks that a tally of a few units
// holds memory for a few, not for tens of thousands: a spec file may name
// thousands of experiments, most of them with few units in a given log.
// The bound, 64 KiB per experiment over 16 partitions, is common practice
// for "proportional to what arrived" (a few units need a few hundred
// bytes each at most); before, each partition reserved 64Ki units of
// state, events and key offsets, about 3 MB.
func TestTallierReservesAsUnitsArrive(t *testing.T) {
	rec := batch(t, []row{
		seen("u1", hour, "control"), seen("u2", hour, "treat"), seen("u3", 2*hour, "treat"),
		{user: "u1", at: 3 * hour, event: "buy"},
	})
	defer rec.Release()
	const n = 20
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	keep := make([]*Tallier, 0, n)
	for range n {
		tl, err := newTallier(spec2(), 16)
		if err != nil {
			t.Fatal(err)
		}
		if err := tl.Add(rec); err != nil {
			t.Fatal(err)
		}
		keep = append(keep, tl)
	}
	runtime.ReadMemStats(&after)
	runtime.KeepAlive(keep)
	if per := (after.TotalAlloc - before.TotalAlloc) / n; per > 64<<10 {
		t.Errorf("a tally of 3 units allocated %d bytes; want at most %d", per, 64<<10)
	}
	tally, err := keep[0].Tally()
	if err != nil {
		t.Fatal(err)
	}
	// Worked out by hand: u1 in control converts; u2 and u3 in treat do not.
	if got := tally.Arms; len(got) != 2 || got[0].Units != 1 || got[1].Units != 2 || got[0].Metrics[0].Conversions != 1 {
		t.Errorf("tally %+v; want control 1 unit 1 conversion, treat 2 units", got)
	}
}

// TestChunkedGrowsAcrossChunks checks the chunked slice across its first
// chunk's doublings, past a full chunk and past the slabs' cap (full
// chunks cut from shared allocations must not overlap): element i reads
// back as i after all are written.
func TestChunkedGrowsAcrossChunks(t *testing.T) {
	perSlab := slabBytes / (4 << chunkBits) // int32 chunks in a full slab
	for _, n := range []int{5, 3<<chunkBits + 5, (2*perSlab+3)<<chunkBits + 7} {
		var c chunked[int32]
		for i := range n {
			c.add(int32(i))
		}
		if c.len() != n {
			t.Fatalf("len %d, want %d", c.len(), n)
		}
		for i := range n {
			if got := *c.at(i); got != int32(i) {
				t.Fatalf("n=%d: at(%d) = %d", n, i, got)
			}
		}
	}
}
