package experiment

import (
	"bytes"
	"testing"
)

// BenchmarkTallierState measures saving and resuming the state of a
// 1M-unit tally (the fixed cost of an incremental run) and reports its
// bytes per unit.
func BenchmarkTallierState(b *testing.B) {
	batches, _ := benchBatches(b, 1_000_000)
	spec := spec2()
	t, err := NewTallier(spec)
	if err != nil {
		b.Fatal(err)
	}
	for _, rec := range batches {
		if err := t.Add(rec); err != nil {
			b.Fatal(err)
		}
	}
	var buf bytes.Buffer
	if err := t.WriteState(&buf); err != nil {
		b.Fatal(err)
	}
	b.ReportMetric(float64(buf.Len())/float64(t.StateUnits()), "bytes/unit")
	b.Run("write", func(b *testing.B) {
		for b.Loop() {
			buf.Reset()
			if err := t.WriteState(&buf); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("read", func(b *testing.B) {
		for b.Loop() {
			r, err := NewTallier(spec)
			if err != nil {
				b.Fatal(err)
			}
			if err := r.ReadState(buf.Bytes()); err != nil {
				b.Fatal(err)
			}
		}
	})
}
