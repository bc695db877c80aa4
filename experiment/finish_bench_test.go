package experiment

import "testing"

// BenchmarkTallierTally measures the finish step alone: the same 1M-unit
// log as BenchmarkTallierAdd is added once, outside the timer, then each
// iteration calls Tally, which attributes the metric events, decides each
// unit's arm and sums the unit records.
//
// A Tallier keeps the attribution of its events until the next Add, so
// each iteration first adds an empty batch (no rows, so nothing else
// changes) to make Tally redo the whole finish step rather than reuse it.
// Every iteration must give the units the first Tally gave.
func BenchmarkTallierTally(b *testing.B) {
	batches, _ := benchBatches(b, 1_000_000)
	t, err := NewTallier(spec2())
	if err != nil {
		b.Fatal(err)
	}
	for _, rec := range batches {
		if err := t.Add(rec); err != nil {
			b.Fatal(err)
		}
	}
	empty := batch(b, nil)
	defer empty.Release()
	first, err := t.Tally()
	if err != nil {
		b.Fatal(err)
	}
	want := totalUnits(first)
	if want == 0 || want > 1_000_000 {
		b.Fatalf("first Tally has %d units, want some of the log's 1,000,000", want)
	}
	b.ReportAllocs()
	var got Tally
	for b.Loop() {
		if err := t.Add(empty); err != nil {
			b.Fatal(err)
		}
		if got, err = t.Tally(); err != nil {
			b.Fatal(err)
		}
	}
	if n := totalUnits(got); n != want {
		b.Fatalf("last Tally has %d units, the first had %d", n, want)
	}
	b.ReportMetric(float64(want)*float64(b.N)/b.Elapsed().Seconds(), "units/s")
}

// totalUnits returns the analysed units of a tally, summed over its arms.
func totalUnits(t Tally) int64 {
	var n int64
	for _, a := range t.Arms {
		n += a.Units
	}
	return n
}
