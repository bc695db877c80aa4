package ingest

import (
	"math/rand/v2"
	"os"
	"slices"
	"strings"
	"testing"

	"github.com/apache/arrow-go/v18/arrow/memory"
	"github.com/parquet-go/parquet-go"
)

// A Spill gives back every row it was given, each in exactly one
// partition with every other row of its user, in the order added, nulls
// kept; and Close removes its files.
func TestSpillRoundTrip(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 9))
	data := writeParquet(t, randomBulkRows(rng, 4000), parquet.MaxRowsPerRowGroup(500))
	m := DefaultMapping()
	m.Segments = []string{"country"}
	opts := Options{Mapping: m, MaxBadRows: NoLimit, BatchSize: 300}
	src := []Source{BytesSource("e.parquet", data)}
	want, _, err := readAll(t, src, opts)
	if err != nil {
		t.Fatal(err)
	}
	if len(want) < 3000 {
		t.Fatalf("only %d rows", len(want))
	}

	mem := memory.NewCheckedAllocator(memory.NewGoAllocator())
	defer mem.AssertSize(t, 0)
	opts.Allocator = mem
	r, err := NewReader(src, opts)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	s, err := NewSpill(t.TempDir(), 7, r.Schema())
	if err != nil {
		t.Fatal(err)
	}
	for r.Next() {
		if err := s.Add(r.RecordBatch()); err != nil {
			t.Fatal(err)
		}
	}
	if err := r.Err(); err != nil {
		t.Fatal(err)
	}
	var byPart [][]string
	partOf := map[string]int{} // user -> partition
	var total int64
	for p := range s.Partitions() {
		sr, err := s.Reader(p, mem, 100)
		if err != nil {
			t.Fatal(err)
		}
		var rows []string
		for sr.Next() {
			rec := sr.RecordBatch()
			if !rec.Schema().Equal(r.Schema()) {
				t.Fatalf("schema %v", rec.Schema())
			}
			for i := 0; i < int(rec.NumRows()); i++ {
				var cells []string
				for _, col := range rec.Columns() {
					cells = append(cells, cellText(col, i))
				}
				user := cells[0]
				if q, ok := partOf[user]; ok && q != p {
					t.Fatalf("user %s in partitions %d and %d", user, q, p)
				}
				partOf[user] = p
				rows = append(rows, strings.Join(cells, " | "))
			}
		}
		if err := sr.Err(); err != nil {
			t.Fatal(err)
		}
		if err := sr.Close(); err != nil {
			t.Fatal(err)
		}
		if int64(len(rows)) != s.Rows(p) {
			t.Errorf("partition %d: %d rows read back, %d written", p, len(rows), s.Rows(p))
		}
		total += s.Rows(p)
		byPart = append(byPart, rows)
	}
	if int(total) != len(want) {
		t.Errorf("%d rows spilled, %d read", total, len(want))
	}
	// Partition p holds exactly the rows of its users, in the order added.
	for p, rows := range byPart {
		var wantP []string
		for _, w := range want {
			if partOf[strings.SplitN(w, " | ", 2)[0]] == p {
				wantP = append(wantP, w)
			}
		}
		if !slices.Equal(rows, wantP) {
			t.Errorf("partition %d: %d rows read back differ from the %d rows of its users", p, len(rows), len(wantP))
		}
	}
	dir := s.Dir()
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(dir); !os.IsNotExist(err) {
		t.Errorf("spill folder %s left behind: %v", dir, err)
	}
}
