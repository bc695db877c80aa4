package ingest

import (
	"bytes"
	"compress/gzip"
	"encoding/csv"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"strconv"
	"strings"
	"testing"
)

// csvTestFiles are the CSV files committed anywhere in the repository.
var csvTestFiles = []string{
	"testdata/events_bom_crlf.csv",
	"testdata/table_units.csv",
	"testdata/table_counts.csv",
	"testdata/parquet-testing/upstream/data/delta_binary_packed_expect.csv",
	"testdata/parquet-testing/upstream/data/delta_byte_array_expect.csv",
	"../cmd/armtally/testdata/spec/two/events.csv",
	"../cmd/armtally/testdata/spec/counts/counts.csv",
	"../cmd/armtally/testdata/spec/units/units.csv",
	"../cmd/armtally/testdata/inspect/small.csv",
	"../experiment/stats/testdata/r_cases.csv",
}

// csvMappings returns the mappings a file is read with: the default one,
// and one made of its header (first column the user, second ts, third
// event, the rest segments), so that every file's cells go through the
// row rules whatever its columns are called.
func csvMappings(data []byte) []Mapping {
	ms := []Mapping{DefaultMapping()}
	r := csv.NewReader(bytes.NewReader(bytes.TrimPrefix(data, utf8BOM)))
	r.FieldsPerRecord = -1
	h, err := r.Read()
	if err != nil || len(h) < 3 {
		return ms
	}
	seen := map[string]bool{}
	for _, c := range h {
		if seen[c] || c == "" {
			return ms
		}
		seen[c] = true
	}
	return append(ms, Mapping{User: h[0], TS: h[1], Event: h[2], Segments: h[3:], EpochUnit: "s"})
}

// readOutcome is everything a read of one input gives.
type readOutcome struct {
	rows []string
	st   Stats
	err  string
}

// compareCSVPaths reads data with one encoding/csv reader and with the
// parallel path (1 to 8 workers, several chunk sizes), and fails unless
// they give the same rows, counts, bad rows and errors.
func compareCSVPaths(t *testing.T, name string, data []byte, opts Options) {
	t.Helper()
	compareCSVPathsWith(t, name, data, opts, []int{1, 2, 3, 4, 5, 6, 7, 8}, []int{1, 61, 1 << 20})
}

// compareCSVPathsWith is compareCSVPaths with the given worker counts and
// chunk sizes.
func compareCSVPathsWith(t *testing.T, name string, data []byte, opts Options, workerCounts, chunks []int) {
	t.Helper()
	read := outcomeOf(t, name, data)
	seq := opts
	seq.rowByRow = true
	want := read(seq)
	compareParallel(t, name, want, read, opts, workerCounts, chunks)
	// A gzip-compressed file is cut by one splitter from the decompressed
	// stream, not read in blocks by the workers: the same again for it.
	var zb bytes.Buffer
	zw := gzip.NewWriter(&zb)
	zw.Write(data)
	zw.Close()
	readGz := outcomeOf(t, name, zb.Bytes())
	compareParallel(t, name+" (gzip)", readGz(seq), readGz, opts, workerCounts[len(workerCounts)-1:], chunks)
}

// outcomeOf returns a function that reads data, named name, with the
// options it is given.
func outcomeOf(t *testing.T, name string, data []byte) func(Options) readOutcome {
	return func(o Options) readOutcome {
		rows, st, err := readAll(t, []Source{BytesSource(name, data)}, o)
		out := readOutcome{rows: rows, st: st}
		if err != nil {
			out.err = err.Error()
		}
		return out
	}
}

// compareParallel reads with the parallel path (the given worker counts
// and chunk sizes) and fails unless each read gives want.
func compareParallel(t *testing.T, name string, want readOutcome, read func(Options) readOutcome, opts Options, workerCounts, chunks []int) {
	t.Helper()
	for _, workers := range workerCounts {
		for _, chunk := range chunks {
			par := opts
			par.Workers, par.csvChunk = workers, chunk
			got := read(par)
			if got.err != want.err {
				t.Fatalf("%s, %d workers, chunk %d: error\n got %s\nwant %s", name, workers, chunk, got.err, want.err)
			}
			if want.err != "" {
				// Batches already handed on before an error may differ
				// (the sequential reader drops its partial batch);
				// the rows read and the bad rows may not.
				got.rows, want.rows, got.st.Rows = nil, nil, want.st.Rows
			}
			if !reflect.DeepEqual(got, want) {
				t.Fatalf("%s, %d workers, chunk %d:\n got %+v\nwant %+v", name, workers, chunk, got, want)
			}
		}
	}
}

// The CSV test files read the same on every path, and with dictionary
// columns (Options.DictionaryColumns) as without.
func TestCSVParallelMatchesSequentialOnFiles(t *testing.T) {
	for _, path := range csvTestFiles {
		data, err := os.ReadFile(filepath.FromSlash(path))
		if err != nil {
			t.Fatal(err)
		}
		for i, m := range csvMappings(data) {
			for _, budget := range []int64{0, NoLimit} {
				t.Run(fmt.Sprintf("%s/%d/%d", filepath.Base(path), i, budget), func(t *testing.T) {
					compareCSVPaths(t, filepath.Base(path), data, Options{Mapping: m, MaxBadRows: budget, BatchSize: 5})
					// CSV rows have no dictionary: with dictionary
					// columns each value is placed by its text, and the
					// rows, counts and errors are the same.
					read := outcomeOf(t, filepath.Base(path), data)
					for _, rowByRow := range []bool{true, false} {
						o := Options{Mapping: m, MaxBadRows: budget, BatchSize: 5, Workers: 3, rowByRow: rowByRow}
						want := read(o)
						o.DictionaryColumns = true
						if got := read(o); !reflect.DeepEqual(got, want) {
							t.Fatalf("dictionary columns, row by row %v:\n got %+v\nwant %+v", rowByRow, got, want)
						}
					}
				})
			}
		}
	}
}

// The committed fuzz corpus holds hand-made awkward inputs (quoted line
// ends, byte-order marks, bare quotes).
func TestCSVParallelMatchesSequentialOnFuzzCorpus(t *testing.T) {
	dir := filepath.Join("testdata", "fuzz", "FuzzCSVReader")
	ents, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	if len(ents) == 0 {
		t.Fatal("empty corpus")
	}
	for _, e := range ents {
		data, sep := readFuzzSeed(t, filepath.Join(dir, e.Name()))
		delim := []rune{',', ';', '\t', '|'}[int(sep)%4]
		m := DefaultMapping()
		m.Segments = []string{"country"}
		for _, budget := range []int64{0, NoLimit} {
			compareCSVPaths(t, e.Name()+".csv", data, Options{Mapping: m, ExposureEvent: "exposure", Delimiter: delim, MaxBadRows: budget, BatchSize: 3})
		}
	}
}

// readFuzzSeed reads a corpus file of FuzzCSVReader: the "go test fuzz
// v1" header, a []byte literal and a byte literal.
func readFuzzSeed(t *testing.T, path string) ([]byte, byte) {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSpace(string(b)), "\n")
	if len(lines) != 3 || lines[0] != "go test fuzz v1" {
		t.Fatalf("%s: not a two-value corpus file", path)
	}
	data, err := strconv.Unquote(strings.TrimSuffix(strings.TrimPrefix(lines[1], "[]byte("), ")"))
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	v := strings.TrimSuffix(strings.TrimPrefix(lines[2], "byte("), ")")
	var sep byte
	if s, err := strconv.Unquote(v); err == nil && len(s) == 1 {
		sep = s[0]
	} else if n, err := strconv.ParseUint(v, 0, 8); err == nil {
		sep = byte(n)
	} else {
		t.Fatalf("%s: byte value %q", path, v)
	}
	return []byte(data), sep
}

// Crafted logs, written by encoding/csv's Writer: quoted fields with line
// ends, delimiters and doubled quotes, CRLF line ends, empty lines and bad
// rows, read with chunks small enough that chunk edges fall inside quoted
// fields; then the same logs damaged by a stray quote, a cut-off end, an
// unclosed quote.
func TestCSVParallelMatchesSequentialCrafted(t *testing.T) {
	for seed := uint64(1); seed <= 6; seed++ {
		rng := rand.New(rand.NewPCG(seed, 7))
		data := craftedCSV(rng, 200, seed%2 == 0)
		m := DefaultMapping()
		m.Segments = []string{"note"}
		opts := Options{Mapping: m, ExposureEvent: "exposure", MaxBadRows: NoLimit, BatchSize: 16, Events: []string{"exposure", "buy"}}
		compareCSVPaths(t, "crafted.csv", data, opts)
		strict := opts
		strict.MaxBadRows = 0
		compareCSVPaths(t, "crafted.csv", data, strict)
		budget := opts
		budget.MaxBadRows = 3
		compareCSVPaths(t, "crafted.csv", data, budget)
		for k := 0; k < 4; k++ {
			at := 40 + rng.IntN(len(data)-40)
			stray := append(append(bytes.Clone(data[:at]), '"'), data[at:]...)
			compareCSVPaths(t, "stray.csv", stray, opts)
		}
		compareCSVPaths(t, "cut.csv", data[:len(data)*2/3], opts)
		compareCSVPaths(t, "unclosed.csv", append(bytes.Clone(data), []byte("u9,2026-03-01,buy,e,\"a\n\n")...), opts)
	}
}

// craftedCSV writes n records of the default columns plus a note.
func craftedCSV(rng *rand.Rand, n int, crlf bool) []byte {
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	w.UseCRLF = crlf
	notes := []string{"", "plain", "a,b", "two\nlines", "say \"hi\"", "\n", "\"", "x\r\ny", ",\n,"}
	w.Write([]string{"user_id", "ts", "event", "experiment", "arm", "note"})
	for i := 0; i < n; i++ {
		u := "u" + strconv.Itoa(rng.IntN(50))
		ev := []string{"exposure", "buy", "view"}[rng.IntN(3)]
		ts := fmt.Sprintf("2026-03-%02d", 1+rng.IntN(28))
		arm := []string{"control", "treatment", "", "multi\nline arm"}[rng.IntN(4)]
		if rng.IntN(20) == 0 {
			ts = "not a time"
		}
		rec := []string{u, ts, ev, "exp", arm, notes[rng.IntN(len(notes))]}
		if rng.IntN(30) == 0 {
			rec = rec[:4] // too few fields
		}
		w.Write(rec)
		if rng.IntN(25) == 0 {
			w.Flush()
			buf.WriteString("\n") // an empty line, skipped
		}
	}
	w.Flush()
	return buf.Bytes()
}
