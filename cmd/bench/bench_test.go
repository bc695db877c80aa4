package main

import (
	"bytes"
	"context"
	"database/sql"
	"fmt"
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/report"
)

// testLogs are small generated logs shared by the tests and benchmarks of
// this package, written once by TestMain.
var testLogs struct {
	dir     string
	parquet string
	csv     string
	info    logInfo
}

// benchFileEnv names a Parquet log for the decode benchmarks; without it
// they read the small log TestMain writes.
const benchFileEnv = "ARMTALLY_BENCH_PARQUET"

func TestMain(m *testing.M) {
	code, err := testMain(m)
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	os.Exit(code)
}

func testMain(m *testing.M) (int, error) {
	dir, err := os.MkdirTemp("", "bench-test-*")
	if err != nil {
		return 0, err
	}
	defer os.RemoveAll(dir)
	testLogs.dir = dir
	// 3,000 exposed units: about 30,000 rows in 1 row group (Parquet) and
	// the same rows as CSV, seed 7.
	var out bytes.Buffer
	for _, format := range []string{"parquet", "csv"} {
		path, info, err := ensureLog(dir, logSpec{Users: 3000, Noise: 7.9, Seed: 7, Format: format}, &out)
		if err != nil {
			return 0, err
		}
		if format == "parquet" {
			testLogs.parquet, testLogs.info = path, info
		} else {
			testLogs.csv = path
		}
	}
	return m.Run(), nil
}

// armtallyInProcess returns armtally's counts for file, read back from its
// JSON readout as the harness reads them.
func armtallyInProcess(t *testing.T, file string) counts {
	t.Helper()
	ro, err := analyzeInProcess(defaultAnalysis(), []string{file})
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := report.WriteJSON(&buf, []experiment.Readout{ro}); err != nil {
		t.Fatal(err)
	}
	c, rows, err := armtallyCounts(buf.Bytes(), defaultAnalysis().Metric)
	if err != nil {
		t.Fatal(err)
	}
	if rows != testLogs.info.Rows {
		t.Errorf("armtally read %d rows of %s, the generator wrote %d", rows, filepath.Base(file), testLogs.info.Rows)
	}
	return c
}

// TestCountsAgree checks that armtally and both DuckDB queries give the same
// per-arm counts on the small log, as Parquet and as CSV. The log has
// multi-arm units (1% of units), immature units (the window ends 3 days
// after the last exposures, short of the 7-day window) and exposures before
// the window's start, so every rule of the analysis is exercised.
func TestCountsAgree(t *testing.T) {
	db, err := openDuckDB(2)
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	ctx := context.Background()
	want := armtallyInProcess(t, testLogs.parquet)
	if got := armtallyInProcess(t, testLogs.csv); compareCounts(got, want) != nil {
		t.Errorf("armtally on CSV: %v", compareCounts(got, want))
	}
	if want.MultiArmUnits == 0 || len(want.Arms) != 3 {
		t.Fatalf("the test log lacks multi-arm units or arms: %+v", want)
	}
	for _, a := range want.Arms {
		if a.Immature == 0 || a.Conversions == 0 {
			t.Fatalf("the test log lacks immature units or conversions: %+v", a)
		}
	}
	for _, format := range []string{"parquet", "csv"} {
		file := testLogs.parquet
		if format == "csv" {
			file = testLogs.csv
		}
		src, err := sourceSQL(file, format)
		if err != nil {
			t.Fatal(err)
		}
		for name, q := range map[string]func(context.Context, *sql.DB, string, analysis) (counts, error){
			"analyze":       duckdbAnalyze,
			"analyze-1pass": duckdbAnalyzeOnePass,
		} {
			got, err := q(ctx, db, src, defaultAnalysis())
			if err != nil {
				t.Fatalf("%s %s: %v", format, name, err)
			}
			if err := compareCounts(want, got); err != nil {
				t.Errorf("%s %s: %v", format, name, err)
			}
		}
		s, err := duckdbScan(ctx, db, src)
		if err != nil {
			t.Fatal(err)
		}
		if s.Rows != testLogs.info.Rows {
			t.Errorf("%s scan: %d rows, want %d", format, s.Rows, testLogs.info.Rows)
		}
	}
}

// TestCompareCountsFails checks that a one-unit difference is reported.
func TestCompareCountsFails(t *testing.T) {
	a := counts{Arms: []armCounts{{Arm: "control", Units: 10, MetricUnits: 8, Conversions: 2, Immature: 2}}}
	b := a
	b.Arms = []armCounts{a.Arms[0]}
	b.Arms[0].Conversions++
	if compareCounts(a, b) == nil {
		t.Error("compareCounts missed a difference in conversions")
	}
	if compareCounts(a, a) != nil {
		t.Error("compareCounts reported a difference between equal counts")
	}
}

// TestDecodePathsAgree checks that every decode path reads the same values:
// as many ts values as the generator wrote rows, and the same checksum.
func TestDecodePathsAgree(t *testing.T) {
	var first decodeSum
	for i, m := range decodeMethods() {
		got, err := m.Run(testLogs.parquet, 2)
		if err != nil {
			t.Fatalf("%s: %v", m.Name, err)
		}
		if got.Rows != testLogs.info.Rows {
			t.Errorf("%s: %d rows, want %d", m.Name, got.Rows, testLogs.info.Rows)
		}
		// Every non-exposure row has a null experiment and a null arm.
		if want := 2 * (testLogs.info.Rows - testLogs.info.ExposureRows); got.Nulls != want {
			t.Errorf("%s: %d nulls, want %d", m.Name, got.Nulls, want)
		}
		if i == 0 {
			first = got
		} else if got != first {
			t.Errorf("%s: %+v, %s: %+v", m.Name, got, decodeMethods()[0].Name, first)
		}
	}
}

// BenchmarkDecode reads the five needed columns with each decode path and 2
// goroutines. Set ARMTALLY_BENCH_PARQUET to a generated log (go run . gen)
// to measure at full size, for example:
//
//	ARMTALLY_BENCH_PARQUET=/tmp/armtally-bench/events-u10000000-n7.9-s1.parquet \
//	  go test -run '^$' -bench Decode -benchtime 1x -count 5
func BenchmarkDecode(b *testing.B) {
	file := os.Getenv(benchFileEnv)
	if file == "" {
		file = testLogs.parquet
	}
	for _, m := range decodeMethods() {
		b.Run(m.Name, func(b *testing.B) {
			var sum decodeSum
			for b.Loop() {
				s, err := m.Run(file, 2)
				if err != nil {
					b.Fatal(err)
				}
				sum = s
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(sum.Rows), "ns/row")
		})
	}
}

// BenchmarkAnalyzeInProcess runs armtally's analysis (the calls of armtally
// analyze) on the log named by ARMTALLY_BENCH_PARQUET, or the small one.
func BenchmarkAnalyzeInProcess(b *testing.B) {
	file := os.Getenv(benchFileEnv)
	if file == "" {
		file = testLogs.parquet
	}
	for b.Loop() {
		if _, err := analyzeInProcess(defaultAnalysis(), []string{file}); err != nil {
			b.Fatal(err)
		}
	}
}

// The parts of the run mode: --only and --skip select from harnessParts,
// and an unknown name is refused (common practice).
func TestSelectParts(t *testing.T) {
	for _, c := range []struct {
		only, skip string
		want       []string
		err        bool
	}{
		{"", "", harnessParts, false},
		{"csv", "", []string{"csv"}, false},
		{"csv,csv-large", "csv-large", []string{"csv"}, false},
		{"", "csv-large,decode,profile", []string{"parquet", "parquet-small", "csv", "scaling", "incremental"}, false},
		{"csvv", "", nil, true},
		{"", "nope", nil, true},
	} {
		got, err := selectParts(c.only, c.skip)
		if (err != nil) != c.err {
			t.Fatalf("only %q skip %q: error %v, want error %v", c.only, c.skip, err, c.err)
		}
		if err != nil {
			continue
		}
		if len(got) != len(c.want) {
			t.Fatalf("only %q skip %q: %v, want %v", c.only, c.skip, got, c.want)
		}
		for _, p := range c.want {
			if !got[p] {
				t.Fatalf("only %q skip %q: %v lacks %s", c.only, c.skip, got, p)
			}
		}
	}
}

// The targets table judges each bound from the medians it is given: the
// bounds are the (0.4 of DuckDB's wall for CSV), the medians here
// made up around them.
func TestTargetsJudgeBounds(t *testing.T) {
	sc := func(name string, users int, arm, duck float64) *scenario {
		return &scenario{Name: name, Spec: logSpec{Users: users}, Info: logInfo{Rows: int64(users) * 10},
			Armtally: stats{Wall: time.Duration(arm * float64(time.Second)), CPU: time.Duration(1.8 * arm * float64(time.Second))},
			DuckDB:   stats{Wall: time.Duration(duck * float64(time.Second)), CPU: time.Duration(duck * float64(time.Second))}}
	}
	rep := &benchReport{Scenarios: []*scenario{sc("csv", 1_000_000, 1.9, 5), sc("csv-large", 10_000_000, 2.1, 5)}}
	got := map[string]string{}
	for _, r := range targets(rep) {
		got[r.Target] = r.Status
	}
	for target, want := range map[string]string{
		"CSV, 1M units: wall at most 0.4 of DuckDB's":                                                                                    "met",
		"CSV, 10M units: wall at most 0.4 of DuckDB's":                                                                                   "**missed**",
		"CSV, 1M units: both cores busy (read as CPU time at least 1.6 times the wall)":                                                  "met",
		"Incremental, 10M units over 30 days: night 30 at most 0.1 of a full run, byte-identical JSON, state at most 100 bytes per unit": "not measured",
	} {
		if got[target] != want {
			t.Errorf("%s: %q, want %q (all: %v)", target, got[target], want, got)
		}
	}
}
