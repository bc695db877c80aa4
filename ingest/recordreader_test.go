package ingest

import (
	"math/rand/v2"
	"testing"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/apache/arrow-go/v18/arrow/memory"
	"github.com/parquet-go/parquet-go"
)

// drainRetaining reads a record reader to its end, keeping the first batch past
// the reader's next call (Retain on the batch, as Arrow's convention has
// it), and returns the rows and that batch.
func drainRetaining(t *testing.T, rr array.RecordReader) (int64, arrow.RecordBatch) {
	t.Helper()
	var rows int64
	var kept arrow.RecordBatch
	for rr.Next() {
		rec := rr.RecordBatch()
		if !rec.Schema().Equal(rr.Schema()) {
			t.Fatalf("batch schema %v, want %v", rec.Schema(), rr.Schema())
		}
		if kept == nil {
			rec.Retain()
			kept = rec
		}
		rows += rec.NumRows()
	}
	if err := rr.Err(); err != nil {
		t.Fatal(err)
	}
	return rows, kept
}

// TestRecordReaders uses the Reader (both Parquet paths and CSV), the
// TableReader and the SpillReader as array.RecordReaders: every row comes
// through, a retained batch outlives the reader, Retain holds the reader
// open until the matching Release, and once everything is released every
// byte taken from the allocator is given back (memory.CheckedAllocator).
// Common practice: Arrow's reference-counting contract.
func TestRecordReaders(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	data := writeParquet(t, randomBulkRows(rng, 3000), parquet.MaxRowsPerRowGroup(700))
	pq := BytesSource("e.parquet", data)
	csv := BytesSource("e.csv", []byte("user_id,ts,event,arm,buy\nu1,2026-03-01,view,a,1\nu2,2026-03-02,buy,b,0\nu3,2026-03-02,buy,b,1\n"))
	m := DefaultMapping()
	m.Segments = []string{"country"}
	bulkRows, _, err := readAll(t, []Source{pq}, Options{Mapping: m, MaxBadRows: NoLimit})
	if err != nil {
		t.Fatal(err)
	}

	type made struct {
		rr   array.RecordReader
		rows int64
	}
	makers := []struct {
		name string
		make func(mem memory.Allocator) made
	}{
		{"parquet bulk", func(mem memory.Allocator) made {
			r, err := NewReader([]Source{pq}, Options{Mapping: m, MaxBadRows: NoLimit, BatchSize: 500, Allocator: mem})
			if err != nil {
				t.Fatal(err)
			}
			return made{r, int64(len(bulkRows))}
		}},
		{"parquet row by row", func(mem memory.Allocator) made {
			r, err := NewReader([]Source{pq}, Options{Mapping: m, MaxBadRows: NoLimit, BatchSize: 500, Allocator: mem, rowByRow: true})
			if err != nil {
				t.Fatal(err)
			}
			return made{r, int64(len(bulkRows))}
		}},
		{"csv", func(mem memory.Allocator) made {
			r, err := NewReader([]Source{csv}, Options{Mapping: Mapping{User: "user_id", TS: "ts", Event: "event", Arm: "arm"}, BatchSize: 2, Allocator: mem})
			if err != nil {
				t.Fatal(err)
			}
			return made{r, 3}
		}},
		{"unit table", func(mem memory.Allocator) made {
			r, err := NewUnitTableReader([]Source{csv}, UnitTableOptions{Unit: "user_id", Arm: "arm", TS: "ts",
				Metrics: []ColumnMap{{"buy", "buy"}}, BatchSize: 2, Allocator: mem})
			if err != nil {
				t.Fatal(err)
			}
			return made{r, 3}
		}},
		{"spill", func(mem memory.Allocator) made {
			r, err := NewReader([]Source{pq}, Options{Mapping: m, MaxBadRows: NoLimit, Allocator: mem})
			if err != nil {
				t.Fatal(err)
			}
			defer r.Release()
			s, err := NewSpill(t.TempDir(), 1, r.Schema())
			if err != nil {
				t.Fatal(err)
			}
			t.Cleanup(func() { s.Close() })
			for r.Next() {
				if err := s.Add(r.RecordBatch()); err != nil {
					t.Fatal(err)
				}
			}
			sr, err := s.Reader(0, mem, 400)
			if err != nil {
				t.Fatal(err)
			}
			return made{sr, int64(len(bulkRows))}
		}},
	}
	for _, mk := range makers {
		t.Run(mk.name, func(t *testing.T) {
			mem := memory.NewCheckedAllocator(memory.NewGoAllocator())
			defer mem.AssertSize(t, 0)
			m := mk.make(mem)
			rr := m.rr
			rr.Retain() // two references
			rows, kept := drainRetaining(t, rr)
			if rows != m.rows {
				t.Errorf("%d rows, want %d", rows, m.rows)
			}
			rr.Release() // one left: the reader still holds its buffers
			if kept == nil || kept.NumRows() == 0 {
				t.Fatal("no batch kept")
			}
			rr.Release() // the last: the reader closes
			if rr.Next() {
				t.Error("Next after the last Release returned true")
			}
			// The kept batch is the caller's until released.
			if kept.Column(0).Len() != int(kept.NumRows()) {
				t.Error("kept batch changed")
			}
			kept.Release()

			// Released in the middle of the input, with a batch
			// current: the batch is released with the reader.
			mid := mk.make(mem).rr
			if !mid.Next() {
				t.Fatal("no first batch")
			}
			mid.Release()
			if mid.Next() {
				t.Error("Next after the last Release returned true")
			}
		})
	}
}
