package ingest

import (
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"github.com/parquet-go/parquet-go"
)

// FuzzParquetReader reads a small Parquet file with bytes overwritten (at
// is the position, patch the new bytes) through the bulk path with two
// workers, through the row-by-row path and through the bulk path with
// dictionary columns (Options.DictionaryColumns). The properties: neither panics
// nor hangs (each read must finish within the test's limit, see within);
// every error names the file; no Arrow buffer is left allocated (readAll's
// checked allocator); and every row read is delivered or counted as bad.
// The two paths are not required to read the same values: on some corrupt
// pages parquet-go v0.32.0 returns values from reused buffers without an
// error, different from run to run on either path (the seed in
// testdata/fuzz/FuzzParquetReader/f8024b824ed67cd3: row 83's ts). The seed
// files come from randomBulkRows with dictionary and plain pages, several
// row groups and small pages.
func FuzzParquetReader(f *testing.F) {
	rng := rand.New(rand.NewPCG(21, 23))
	rows := randomBulkRows(rng, 120)
	plain := make([]bulkRowPlain, len(rows))
	for i, r := range rows {
		plain[i] = bulkRowPlain(r)
	}
	seeds := [][]byte{
		writeParquet(f, rows, parquet.MaxRowsPerRowGroup(50), parquet.PageBufferSize(256)),
		writeParquet(f, plain, parquet.MaxRowsPerRowGroup(70)),
	}
	for i, s := range seeds {
		f.Add(uint8(i), uint32(len(s)/2), []byte{0xff})
		f.Add(uint8(i), uint32(len(s)/3), []byte{0, 0, 0, 0})
		f.Add(uint8(i), uint32(100), []byte("x"))
	}
	m := DefaultMapping()
	m.Segments = []string{"country"}
	f.Fuzz(func(t *testing.T, seed uint8, at uint32, patch []byte) {
		data := slices.Clone(seeds[int(seed)%len(seeds)])
		if len(data) > 0 {
			pos := int(at % uint32(len(data)))
			copy(data[pos:], patch)
		}
		src := []Source{BytesSource("f.parquet", data)}
		type result struct {
			rows []string
			st   Stats
			err  error
		}
		var got [3]result
		for i, rowByRow := range []bool{false, true, false} {
			within(t, "fuzz input", func() {
				r, st, err := readAll(t, src, Options{Mapping: m, ExposureEvent: "exposure", MaxBadRows: NoLimit,
					BatchSize: 16, Workers: 2, rowByRow: rowByRow, DictionaryColumns: i == 2})
				got[i] = result{r, st, err}
			})
			if err := got[i].err; err != nil && !strings.HasPrefix(err.Error(), "f.parquet") {
				t.Fatalf("path %d: error does not name the file: %v", i, err)
			}
		}
		// Rows per path: every row read is delivered or counted as bad.
		for i, g := range got {
			if g.err != nil {
				continue
			}
			var bad int64
			for _, rc := range g.st.BadRows {
				bad += rc.Count
			}
			if g.st.RowsRead != g.st.Rows+bad || int64(len(g.rows)) != g.st.Rows {
				t.Fatalf("path %d: %d rows read, %d delivered (%d in batches), %d bad", i, g.st.RowsRead, g.st.Rows, len(g.rows), bad)
			}
		}
	})
}
