package ingest_test

import (
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"github.com/armtally/armtally/ingest"
	"github.com/armtally/armtally/sampledata"
)

// benchUnits is the number of exposed units of the benchmark logs.
const benchUnits = 200_000

// writeBenchLog writes, into a fresh temporary folder, the event log that
// armtally gen writes for the demo scenario scaled to benchUnits units
// (seed 1), with write (sampledata.WriteParquet or WriteCSV), and returns
// its path and the number of rows the generator wrote. Call it before the
// timed loop: it runs once per benchmark function.
func writeBenchLog(b *testing.B, name string, write func(io.Writer, sampledata.Config, rand.Source) (sampledata.Summary, error)) (string, int64) {
	b.Helper()
	cfg := sampledata.DemoConfig()
	cfg.Users = benchUnits
	cfg.NeverExposedUsers = benchUnits / 40 // armtally gen's default
	path := filepath.Join(b.TempDir(), name)
	f, err := os.Create(path)
	if err != nil {
		b.Fatal(err)
	}
	sum, err := write(f, cfg, rand.NewPCG(1, 0x61726d74616c6c79))
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		b.Fatalf("writing %s: %v", name, err)
	}
	return path, sum.Rows
}

// benchRead reads the log at path end to end with the default mapping,
// consuming every batch, in each iteration, and reports rows/s. Every
// iteration must deliver exactly the rows the generator wrote.
func benchRead(b *testing.B, path string, want int64) {
	b.Helper()
	sources, err := ingest.FileSources([]string{path})
	if err != nil {
		b.Fatal(err)
	}
	opts := ingest.Options{Mapping: ingest.DefaultMapping(), ExposureEvent: "exposure"}
	b.ReportAllocs()
	for b.Loop() {
		r, err := ingest.NewReader(sources, opts)
		if err != nil {
			b.Fatal(err)
		}
		var rows int64
		for r.Next() {
			rows += r.RecordBatch().NumRows()
		}
		if err := r.Err(); err != nil {
			b.Fatal(err)
		}
		if err := r.Close(); err != nil {
			b.Fatal(err)
		}
		if rows != want {
			b.Fatalf("read %d rows, the generator wrote %d", rows, want)
		}
	}
	b.ReportMetric(float64(want)*float64(b.N)/b.Elapsed().Seconds(), "rows/s")
}

// BenchmarkReaderParquet reads a generated 200,000-unit Parquet log (zstd,
// dictionary-encoded strings) end to end.
func BenchmarkReaderParquet(b *testing.B) {
	path, rows := writeBenchLog(b, "events.parquet", sampledata.WriteParquet)
	benchRead(b, path, rows)
}

// BenchmarkReaderCSV reads the same log written as CSV end to end.
func BenchmarkReaderCSV(b *testing.B) {
	path, rows := writeBenchLog(b, "events.csv", sampledata.WriteCSV)
	benchRead(b, path, rows)
}
