package ingest

import (
	"bytes"
	"errors"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"

	"github.com/apache/arrow-go/v18/arrow/memory"
	"github.com/parquet-go/parquet-go"
)

// sweep selects how many bytes TestParquetFlipSweep damages: "short" (the
// default) a sample, "full" every byte of every file
// (go test ./ingest -run TestParquetFlipSweep -args -sweep=full).
var sweep = flag.String("sweep", "short", "bytes of the Parquet test files TestParquetFlipSweep flips: short (a sample) or full (every byte)")

// sweepPositions returns the bytes of a Parquet file that the short sweep
// flips: the magic at both ends, the footer length, the first 6 bytes of
// every column chunk (its first page header) and a byte every size/32,
// sorted without repeats. The full sweep flips every byte.
func sweepPositions(t *testing.T, data []byte, full bool) []int64 {
	size := int64(len(data))
	if full {
		all := make([]int64, size)
		for i := range all {
			all[i] = int64(i)
		}
		return all
	}
	set := map[int64]bool{}
	for i := int64(0); i < 4; i++ {
		set[i] = true
	}
	for i := size - 8; i < size; i++ {
		set[i] = true
	}
	pf, err := parquet.OpenFile(bytes.NewReader(data), size)
	if err != nil {
		t.Fatal(err)
	}
	for _, g := range pf.Metadata().RowGroups {
		for _, cc := range g.Columns {
			start := chunkStart(&cc.MetaData)
			for i := start; i < min(start+6, size); i++ {
				set[i] = true
			}
		}
	}
	step := max(1, size/32)
	for i := step / 2; i < size; i += step {
		set[i] = true
	}
	var pos []int64
	for p := range set {
		pos = append(pos, p)
	}
	sort.Slice(pos, func(i, j int) bool { return pos[i] < pos[j] })
	return pos
}

// sweepMapping maps the columns of a Parquet file that armtally reads as
// text (as segments) and the first it reads as a timestamp (as ts); the
// other logical columns come from partition values.
func sweepMapping(t *testing.T, data []byte) (Mapping, []Partition) {
	pf, err := parquet.OpenFile(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		t.Fatal(err)
	}
	m := Mapping{User: keyUser, TS: keyTS, Event: keyEvent}
	schema := pf.Schema()
	for _, path := range schema.Columns() {
		name := strings.Join(path, ".")
		leaf, ok := lookupLeaf(schema, name)
		if !ok || leaf.MaxRepetitionLevel > 0 {
			continue
		}
		if _, detail := textKind(leaf.Node.Type()); detail == "" {
			m.Segments = append(m.Segments, name)
		} else if _, detail := newTSDecoder(leaf.Node.Type(), 0); detail == "" && m.TS == keyTS {
			m.TS = name
		}
	}
	return m, []Partition{{Key: keyUser, Value: "u"}, {Key: keyTS, Value: "2026-01-01"}, {Key: keyEvent, Value: "e"}}
}

// TestParquetFlipSweep damages the Parquet files of parquet-testing's
// data/ one byte at a time (XOR 0xa5; the byte positions of
// sweepPositions, or every byte with -sweep=full) and reads the mapped
// columns of each damaged file through the bulk path and row by row. The
// properties, whatever the damage: the read ends (within), every error
// names the file, no Arrow buffer stays allocated, and every row read is
// delivered or counted as bad. A panic inside parquet-go's decoding is
// recovered into an error (errPanicked) by the readers' last-resort
// guards; the sweep logs each one and counts them but does not fail on
// them: the full sweep finds some in dictionary-encoded pages whose
// indices point past the dictionary (logged with -v). A damaged file may
// read without an error: the files without page checksums have nothing to
// tell a changed value from the original.
func TestParquetFlipSweep(t *testing.T) {
	full := false
	switch *sweep {
	case "short":
	case "full":
		full = true
	default:
		t.Fatalf("-sweep=%s: want short or full", *sweep)
	}
	dir := filepath.Join(parquetTesting(t), "data")
	files, err := filepath.Glob(filepath.Join(dir, "*.parquet"))
	if err != nil || len(files) == 0 {
		t.Fatalf("no Parquet files in %s: %v", dir, err)
	}
	var reads, failed, corrupt, panicked int
	for _, path := range files {
		data, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		name := filepath.Base(path)
		m, parts := sweepMapping(t, data)
		for _, pos := range sweepPositions(t, data, full) {
			bad := bytes.Clone(data)
			bad[pos] ^= 0xa5
			// The bulk path reads with dictionary columns on every
			// other byte (Options.DictionaryColumns), to keep the
			// sweep's time.
			for _, rowByRow := range []bool{false, true} {
				err := sweepRead(t, name, pos, bad, m, parts, rowByRow, !rowByRow && pos%2 == 1)
				reads++
				if err == nil {
					continue
				}
				failed++
				if errors.Is(err, ErrCorrupt) {
					corrupt++
				}
				if !strings.HasPrefix(err.Error(), name+": ") {
					t.Errorf("%s byte %d (row by row %v): error does not name the file: %v", name, pos, rowByRow, err)
				}
				if errors.Is(err, errPanicked) {
					panicked++
					t.Logf("%s byte %d (row by row %v): %v", name, pos, rowByRow, err)
				}
			}
		}
	}
	t.Logf("%s sweep: %d reads of %d files, %d errors (%d ErrCorrupt, %d from a recovered panic)", *sweep, reads, len(files), failed, corrupt, panicked)
}

// sweepRead reads one damaged file and checks the properties of
// TestParquetFlipSweep other than the error's wording (pos, the damaged
// byte, is for the messages); it returns the reader's error.
func sweepRead(t *testing.T, name string, pos int64, data []byte, m Mapping, parts []Partition, rowByRow, dict bool) error {
	t.Helper()
	src := BytesSource(name, data)
	src.Partitions = parts
	mem := memory.NewCheckedAllocator(memory.NewGoAllocator())
	var err error
	var st Stats
	var rows int64
	within(t, fmt.Sprintf("%s byte %d (row by row %v)", name, pos, rowByRow), func() {
		r, e := NewReader([]Source{src}, Options{Mapping: m, MaxBadRows: NoLimit, Allocator: mem, BatchSize: 64, Workers: 2, rowByRow: rowByRow, DictionaryColumns: dict})
		if e != nil {
			err = e
			return
		}
		defer r.Close()
		for r.Next() {
			rows += r.RecordBatch().NumRows()
		}
		err, st = r.Err(), r.Stats()
	})
	mem.AssertSize(t, 0)
	if err == nil {
		var bad int64
		for _, rc := range st.BadRows {
			bad += rc.Count
		}
		if st.RowsRead != st.Rows+bad || rows != st.Rows {
			t.Errorf("%s: %d rows read, %d delivered (%d in batches), %d bad", name, st.RowsRead, st.Rows, rows, bad)
		}
	}
	return err
}
