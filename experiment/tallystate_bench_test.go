package experiment

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/apache/arrow-go/v18/arrow"
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

// BenchmarkTallierResume measures one night of an incremental run inside
// the exposure window: a saved state of about 1.8M units (eight days of
// exposures), then a ninth day whose rows add about 220,000 units and
// touch about 60,000 saved ones, read, tallied, merged and written out.
func BenchmarkTallierResume(b *testing.B) {
	rng := rand.New(rand.NewPCG(3, 4))
	arms := []string{"control", "treat"}
	var saved, night []row
	for u := range 2_000_000 {
		user := fmt.Sprintf("user-%08d-%d", rng.Uint32(), u)
		at := time.Duration(rng.Int64N(int64(9 * day)))
		rows := []row{seen(user, at, arms[u&1])}
		if u%8 == 0 {
			rows = append(rows, seen(user, at+hour, arms[rng.IntN(2)]))
		}
		if u%4 == 0 {
			rows = append(rows, ev(user, at+time.Duration(rng.Int64N(int64(2*day))), "buy"))
		}
		for _, r := range rows {
			if r.at < 8*day {
				saved = append(saved, r)
			} else {
				night = append(night, r)
			}
		}
	}
	batches := func(rows []row) []arrow.RecordBatch {
		var out []arrow.RecordBatch
		for lo := 0; lo < len(rows); lo += 1 << 16 {
			out = append(out, batch(b, rows[lo:min(lo+1<<16, len(rows))]))
		}
		b.Cleanup(func() {
			for _, r := range out {
				r.Release()
			}
		})
		return out
	}
	spec := spec2()
	t, err := NewTallier(spec)
	if err != nil {
		b.Fatal(err)
	}
	for _, rec := range batches(saved) {
		if err := t.Add(rec); err != nil {
			b.Fatal(err)
		}
	}
	var state bytes.Buffer
	if err := t.WriteState(&state); err != nil {
		b.Fatal(err)
	}
	nightBatches := batches(night)
	var out bytes.Buffer
	for b.Loop() {
		r, err := NewTallier(spec)
		if err != nil {
			b.Fatal(err)
		}
		if err := r.ReadState(state.Bytes()); err != nil {
			b.Fatal(err)
		}
		r.ExpectGrowth(float64(len(night)) / float64(len(saved)))
		for _, rec := range nightBatches {
			if err := r.Add(rec); err != nil {
				b.Fatal(err)
			}
		}
		out.Reset()
		if err := r.WriteState(&out); err != nil {
			b.Fatal(err)
		}
		if _, err := r.Tally(); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(t.StateUnits()), "saved-units")
}
