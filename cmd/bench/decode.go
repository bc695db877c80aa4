package main

import (
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"os"
	"sync"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/apache/arrow-go/v18/arrow/memory"
	arrowpq "github.com/apache/arrow-go/v18/parquet"
	"github.com/apache/arrow-go/v18/parquet/file"
	"github.com/apache/arrow-go/v18/parquet/pqarrow"
	"github.com/parquet-go/parquet-go"

	"github.com/armtally/armtally/ingest"
)

// decodeColumns are the columns the analysis needs, in the order the
// decoders read them. ts is a required INT64 TIMESTAMP; the others are
// dictionary-encoded strings, experiment and arm optional.
var decodeColumns = []string{"user_id", "ts", "event", "experiment", "arm"}

// tsColumn is the position of ts in decodeColumns.
const tsColumn = 1

// decodeSum is the checksum every decode path computes over the five
// columns, touching every value: all paths must return the same one.
type decodeSum struct {
	Rows     int64 `json:"rows"`      // values of ts
	TSSum    int64 `json:"ts_sum"`    // sum of ts (microseconds, wrapping)
	Nulls    int64 `json:"nulls"`     // nulls over the string columns
	StrBytes int64 `json:"str_bytes"` // total length of the non-null strings
}

func (s *decodeSum) add(o decodeSum) {
	s.Rows += o.Rows
	s.TSSum += o.TSSum
	s.Nulls += o.Nulls
	s.StrBytes += o.StrBytes
}

// decodeMethod is one way to read the five columns.
type decodeMethod struct {
	Name string
	Desc string
	// Run reads every row group of the file at path with workers
	// goroutines (each takes the next row group when it is free).
	Run func(path string, workers int) (decodeSum, error) `json:"-"`
}

// decodeMethods lists the decode paths compared, in report order.
func decodeMethods() []decodeMethod {
	return []decodeMethod{
		{"parquet-go pages", "parquet-go: `ReadPage` per column chunk, then the page's `Data()`: dictionary indices kept as indices (string lengths looked up by index), `Int64()` for ts", decodePGPages},
		{"parquet-go typed readers", "parquet-go: `page.Values()` with `ReadInt64s`/`ReadByteArrays` where the reader has them, `ReadValues` otherwise", decodePGTyped},
		{"arrow-go pqarrow (dictionary)", "arrow-go `pqarrow` record reader, batch 64Ki rows, `Parallel` and `SetReadDict` on: strings as dictionary arrays", decodePQArrowDict},
		{"arrow-go pqarrow (strings)", "arrow-go `pqarrow` record reader, batch 64Ki rows, `Parallel` on, strings materialised as utf8 arrays", decodePQArrowPlain},
		{"arrow-go column readers", "arrow-go `file` column chunk readers: `ReadBatch` of `int64` / `parquet.ByteArray` values with definition levels", decodeArrowColumns},
		{"armtally ingest.Reader", "armtally's own reader (`ingest.NewReader`, the bulk path: parquet-go pages, one row group per worker) with the row rules, into utf8 record batches of every row (no event filter)", decodeIngest},
	}
}

// decodeIngest reads the file through armtally's ingest.Reader with
// workers goroutines and no event filter, so every row becomes a row of a
// record batch, and sums the batches.
func decodeIngest(path string, workers int) (decodeSum, error) {
	srcs, err := ingest.FileSources([]string{path})
	if err != nil {
		return decodeSum{}, err
	}
	r, err := ingest.NewReader(srcs, ingest.Options{Mapping: ingest.DefaultMapping(), Workers: workers})
	if err != nil {
		return decodeSum{}, err
	}
	defer r.Close()
	var s decodeSum
	for r.Next() {
		rec := r.RecordBatch()
		ts := rec.Column(1).(*array.Timestamp).TimestampValues()
		s.Rows += int64(len(ts))
		for _, v := range ts {
			s.TSSum += int64(v) / 1000 // the file holds microseconds
		}
		for _, c := range []int{0, 2, 3, 4} {
			col := rec.Column(c).(*array.String)
			s.Nulls += int64(col.NullN())
			offs := col.ValueOffsets()
			s.StrBytes += int64(offs[len(offs)-1] - offs[0])
		}
	}
	return s, r.Err()
}

// eachRowGroup runs workers goroutines over the row groups 0..n-1. open
// makes a worker's state; do reads one row group into the worker's sum.
func eachRowGroup[S any](n, workers int, open func() (S, error), do func(S, int, *decodeSum) error, closeFn func(S)) (decodeSum, error) {
	next := make(chan int)
	go func() {
		for i := range n {
			next <- i
		}
		close(next)
	}()
	sums := make([]decodeSum, workers)
	errs := make([]error, workers)
	var wg sync.WaitGroup
	for w := range workers {
		wg.Go(func() {
			st, err := open()
			if err != nil {
				errs[w] = err
				for range next {
				}
				return
			}
			defer closeFn(st)
			for rg := range next {
				if errs[w] != nil {
					continue
				}
				if err := do(st, rg, &sums[w]); err != nil {
					errs[w] = fmt.Errorf("row group %d: %w", rg, err)
				}
			}
		})
	}
	wg.Wait()
	var total decodeSum
	for _, s := range sums {
		total.add(s)
	}
	return total, errors.Join(errs...)
}

// pgFile is one worker's parquet-go view of the file.
type pgFile struct {
	f    *os.File
	pf   *parquet.File
	cols []int // leaf index per decodeColumns entry
}

func openPG(path string) (*pgFile, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	st, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, err
	}
	pf, err := parquet.OpenFile(f, st.Size(), parquet.SkipPageIndex(true), parquet.SkipBloomFilters(true))
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	g := &pgFile{f: f, pf: pf}
	for _, name := range decodeColumns {
		leaf, ok := pf.Schema().Lookup(name)
		if !ok {
			f.Close()
			return nil, fmt.Errorf("%s: no column %q", path, name)
		}
		g.cols = append(g.cols, leaf.ColumnIndex)
	}
	return g, nil
}

func (g *pgFile) close() { g.f.Close() }

// numRowGroupsPG returns the number of row groups of the file at path.
func numRowGroupsPG(path string) (int, error) {
	g, err := openPG(path)
	if err != nil {
		return 0, err
	}
	defer g.close()
	return len(g.pf.RowGroups()), nil
}

// eachPage calls fn for every page of column chunk col of row group rg,
// releasing each page after fn.
func (g *pgFile) eachPage(rg, col int, fn func(parquet.Page) error) error {
	pages := g.pf.RowGroups()[rg].ColumnChunks()[g.cols[col]].Pages()
	defer pages.Close()
	for {
		p, err := pages.ReadPage()
		if err == io.EOF {
			return nil
		}
		if err != nil {
			return fmt.Errorf("column %q: %w", decodeColumns[col], err)
		}
		err = fn(p)
		parquet.Release(p)
		if err != nil {
			return fmt.Errorf("column %q: %w", decodeColumns[col], err)
		}
	}
}

// decodePGPages reads pages and uses their data buffers directly: the
// dictionary indices of string pages stay indices, and each value's length
// is looked up in a table built once per dictionary.
func decodePGPages(path string, workers int) (decodeSum, error) {
	n, err := numRowGroupsPG(path)
	if err != nil {
		return decodeSum{}, err
	}
	type state struct {
		g        *pgFile
		lastDict parquet.Dictionary
		lens     []int32
	}
	open := func() (*state, error) {
		g, err := openPG(path)
		return &state{g: g}, err
	}
	do := func(st *state, rg int, s *decodeSum) error {
		for col := range decodeColumns {
			err := st.g.eachPage(rg, col, func(p parquet.Page) error {
				data := p.Data()
				if col == tsColumn {
					ts := data.Int64()
					s.Rows += int64(len(ts))
					for _, v := range ts {
						s.TSSum += v
					}
					return nil
				}
				s.Nulls += p.NumNulls()
				if d := p.Dictionary(); d != nil {
					if d != st.lastDict {
						dv := d.Page().Data()
						_, offs := dv.ByteArray()
						st.lens = st.lens[:0]
						for i := 1; i < len(offs); i++ {
							st.lens = append(st.lens, int32(offs[i]-offs[i-1]))
						}
						st.lastDict = d
					}
					lens := st.lens
					for _, ix := range data.Int32() {
						s.StrBytes += int64(lens[ix])
					}
					return nil
				}
				_, offs := data.ByteArray()
				for i := 1; i < len(offs); i++ {
					s.StrBytes += int64(offs[i] - offs[i-1])
				}
				return nil
			})
			if err != nil {
				return err
			}
		}
		st.lastDict = nil
		return nil
	}
	return eachRowGroup(n, workers, open, do, func(st *state) {
		if st.g != nil {
			st.g.close()
		}
	})
}

// decodePGTyped reads every page through its value reader, with the typed
// fast paths where the reader offers them and ReadValues where it does not.
func decodePGTyped(path string, workers int) (decodeSum, error) {
	n, err := numRowGroupsPG(path)
	if err != nil {
		return decodeSum{}, err
	}
	type state struct {
		g     *pgFile
		ints  []int64
		bytes []byte
		vals  []parquet.Value
	}
	open := func() (*state, error) {
		g, err := openPG(path)
		return &state{g: g, ints: make([]int64, 4096), bytes: make([]byte, 64<<10), vals: make([]parquet.Value, 4096)}, err
	}
	do := func(st *state, rg int, s *decodeSum) error {
		for col := range decodeColumns {
			err := st.g.eachPage(rg, col, func(p parquet.Page) error {
				vr := p.Values()
				switch r := vr.(type) {
				case parquet.Int64Reader:
					for {
						k, err := r.ReadInt64s(st.ints)
						s.Rows += int64(k)
						for _, v := range st.ints[:k] {
							s.TSSum += v
						}
						if err == io.EOF {
							return nil
						}
						if err != nil {
							return err
						}
					}
				case parquet.ByteArrayReader:
					for {
						k, err := r.ReadByteArrays(st.bytes)
						b := st.bytes
						for range k { // PLAIN: 4-byte length, then the bytes
							l := binary.LittleEndian.Uint32(b)
							s.StrBytes += int64(l)
							b = b[4+l:]
						}
						if err == io.EOF {
							return nil
						}
						if err != nil {
							return err
						}
					}
				}
				for {
					k, err := vr.ReadValues(st.vals)
					for _, v := range st.vals[:k] {
						switch {
						case v.IsNull():
							s.Nulls++
						case col == tsColumn:
							s.Rows++
							s.TSSum += v.Int64()
						default:
							s.StrBytes += int64(len(v.ByteArray()))
						}
					}
					if err == io.EOF {
						return nil
					}
					if err != nil {
						return err
					}
				}
			})
			if err != nil {
				return err
			}
		}
		return nil
	}
	return eachRowGroup(n, workers, open, do, func(st *state) {
		if st.g != nil {
			st.g.close()
		}
	})
}

// arrowFile is one worker's arrow-go view of the file.
type arrowFile struct {
	rdr  *file.Reader
	cols []int // leaf index per decodeColumns entry
}

func openArrow(path string) (*arrowFile, error) {
	rdr, err := file.OpenParquetFile(path, false)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	a := &arrowFile{rdr: rdr}
	sch := rdr.MetaData().Schema
	for _, name := range decodeColumns {
		i := sch.ColumnIndexByName(name)
		if i < 0 {
			rdr.Close()
			return nil, fmt.Errorf("%s: no column %q", path, name)
		}
		a.cols = append(a.cols, i)
	}
	return a, nil
}

func numRowGroupsArrow(path string) (int, error) {
	a, err := openArrow(path)
	if err != nil {
		return 0, err
	}
	defer a.rdr.Close()
	return a.rdr.NumRowGroups(), nil
}

// decodeArrowColumns reads each column chunk with arrow-go's typed column
// readers.
func decodeArrowColumns(path string, workers int) (decodeSum, error) {
	n, err := numRowGroupsArrow(path)
	if err != nil {
		return decodeSum{}, err
	}
	const batch = 4096
	type state struct {
		a    *arrowFile
		ints []int64
		strs []arrowpq.ByteArray
		def  []int16
	}
	open := func() (*state, error) {
		a, err := openArrow(path)
		return &state{a: a, ints: make([]int64, batch), strs: make([]arrowpq.ByteArray, batch), def: make([]int16, batch)}, err
	}
	do := func(st *state, rg int, s *decodeSum) error {
		rgr := st.a.rdr.RowGroup(rg)
		for col, ci := range st.a.cols {
			ccr, err := rgr.Column(ci)
			if err != nil {
				return fmt.Errorf("column %q: %w", decodeColumns[col], err)
			}
			switch r := ccr.(type) {
			case *file.Int64ColumnChunkReader:
				for {
					total, k, err := r.ReadBatch(batch, st.ints, st.def, nil)
					if err != nil {
						return fmt.Errorf("column %q: %w", decodeColumns[col], err)
					}
					if total == 0 {
						break
					}
					s.Rows += int64(k)
					for _, v := range st.ints[:k] {
						s.TSSum += v
					}
				}
			case *file.ByteArrayColumnChunkReader:
				for {
					total, k, err := r.ReadBatch(batch, st.strs, st.def, nil)
					if err != nil {
						return fmt.Errorf("column %q: %w", decodeColumns[col], err)
					}
					if total == 0 {
						break
					}
					s.Nulls += total - int64(k)
					for _, v := range st.strs[:k] {
						s.StrBytes += int64(len(v))
					}
				}
			default:
				return fmt.Errorf("column %q: unexpected reader %T", decodeColumns[col], ccr)
			}
		}
		return nil
	}
	return eachRowGroup(n, workers, open, do, func(st *state) {
		if st.a != nil {
			st.a.rdr.Close()
		}
	})
}

func decodePQArrowDict(path string, workers int) (decodeSum, error) {
	return decodePQArrow(path, workers, true)
}

func decodePQArrowPlain(path string, workers int) (decodeSum, error) {
	return decodePQArrow(path, workers, false)
}

// decodePQArrow reads the columns as Arrow record batches with pqarrow, one
// record reader per row group.
func decodePQArrow(path string, workers int, readDict bool) (decodeSum, error) {
	n, err := numRowGroupsArrow(path)
	if err != nil {
		return decodeSum{}, err
	}
	type state struct {
		a  *arrowFile
		fr *pqarrow.FileReader
	}
	open := func() (*state, error) {
		a, err := openArrow(path)
		if err != nil {
			return &state{}, err
		}
		props := pqarrow.ArrowReadProperties{BatchSize: 64 << 10, Parallel: true}
		for col, ci := range a.cols {
			if col != tsColumn {
				props.SetReadDict(ci, readDict)
			}
		}
		fr, err := pqarrow.NewFileReader(a.rdr, props, memory.DefaultAllocator)
		return &state{a: a, fr: fr}, err
	}
	do := func(st *state, rg int, s *decodeSum) error {
		rr, err := st.fr.GetRecordReader(context.Background(), st.a.cols, []int{rg})
		if err != nil {
			return err
		}
		defer rr.Release()
		for rr.Next() {
			rec := rr.RecordBatch()
			for col := range decodeColumns {
				if err := touchArrow(rec.Column(col), col == tsColumn, s); err != nil {
					return fmt.Errorf("column %q: %w", decodeColumns[col], err)
				}
			}
		}
		return rr.Err()
	}
	return eachRowGroup(n, workers, open, do, func(st *state) {
		if st.a != nil {
			st.a.rdr.Close()
		}
	})
}

// touchArrow folds every value of an Arrow array into s.
func touchArrow(arr arrow.Array, isTS bool, s *decodeSum) error {
	switch a := arr.(type) {
	case *array.Timestamp:
		if !isTS {
			return fmt.Errorf("unexpected timestamp array")
		}
		vs := a.TimestampValues()
		s.Rows += int64(len(vs))
		for _, v := range vs {
			s.TSSum += int64(v)
		}
	case *array.String:
		s.Nulls += int64(a.NullN())
		for i := range a.Len() {
			if a.IsValid(i) {
				s.StrBytes += int64(a.ValueLen(i))
			}
		}
	case *array.Dictionary:
		dict, ok := a.Dictionary().(*array.String)
		if !ok {
			return fmt.Errorf("dictionary of %s, want utf8", a.Dictionary().DataType())
		}
		s.Nulls += int64(a.NullN())
		for i := range a.Len() {
			if a.IsValid(i) {
				s.StrBytes += int64(dict.ValueLen(a.GetValueIndex(i)))
			}
		}
	default:
		return fmt.Errorf("unexpected array %s", arr.DataType())
	}
	return nil
}
