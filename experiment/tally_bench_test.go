package experiment

import (
	"fmt"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/apache/arrow-go/v18/arrow"
)

// benchBatches builds, once per benchmark, a synthetic event log over
// units distinct users: one exposure per unit, a second exposure for one
// unit in eight, one metric event for one unit in four and one irrelevant
// event per unit, shuffled and cut into batches of 64Ki rows.
func benchBatches(b *testing.B, units int) ([]arrow.RecordBatch, int64) {
	b.Helper()
	rng := rand.New(rand.NewPCG(1, 2))
	arms := []string{"control", "treat"}
	var rows []row
	for u := range units {
		user := fmt.Sprintf("user-%08d", rng.Uint32())
		user = fmt.Sprintf("%s-%d", user, u)
		at := time.Duration(rng.Int64N(int64(9 * day)))
		arm := arms[u&1]
		rows = append(rows, row{user: user, at: at, event: "seen", exp: "exp", arm: arm})
		if u%8 == 0 {
			rows = append(rows, row{user: user, at: at + hour, event: "seen", exp: "exp", arm: arms[rng.IntN(2)]})
		}
		if u%4 == 0 {
			rows = append(rows, row{user: user, at: at + time.Duration(rng.Int64N(int64(2*day))), event: "buy"})
		}
		rows = append(rows, row{user: user, at: at, event: "page_view"})
	}
	rng.Shuffle(len(rows), func(i, j int) { rows[i], rows[j] = rows[j], rows[i] })
	const size = 1 << 16
	var out []arrow.RecordBatch
	for lo := 0; lo < len(rows); lo += size {
		out = append(out, batch(b, rows[lo:min(lo+size, len(rows))]))
	}
	b.Cleanup(func() {
		for _, r := range out {
			r.Release()
		}
	})
	return out, int64(len(rows))
}

// BenchmarkTallierAdd measures the per-unit update path: a fresh Tallier
// takes a 1M-unit log, then tallies it.
func BenchmarkTallierAdd(b *testing.B) {
	batches, rows := benchBatches(b, 1_000_000)
	spec := spec2()
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		t, err := NewTallier(spec)
		if err != nil {
			b.Fatal(err)
		}
		for _, rec := range batches {
			if err := t.Add(rec); err != nil {
				b.Fatal(err)
			}
		}
		if _, err := t.Tally(); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(rows)*float64(b.N)/b.Elapsed().Seconds(), "rows/s")
}
