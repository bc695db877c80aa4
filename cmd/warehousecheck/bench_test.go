package warehousecheck

import (
	"context"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/pipeline"
	"github.com/armtally/armtally/experiment/warehouse"
)

// benchDefinition is the analysis of cmd/bench (duckdb.go,
// defaultAnalysis) over a log of armtally's generator: three arms, one
// metric with a 7-day window, a window that leaves out the first day of
// exposures and ends before the last units' windows close.
func benchDefinition() definition {
	start := time.Date(2026, time.November, 3, 0, 0, 0, 0, time.UTC)
	end := time.Date(2026, time.November, 19, 0, 0, 0, 0, time.UTC)
	return definition{name: "bench", cols: warehouse.Columns{User: "user_id", TS: "ts", Event: "event", Experiment: "experiment", Arm: "arm"},
		exps: []pipeline.Experiment{{Options: experiment.DefaultAnalysisOptions(), Spec: experiment.Spec{
			Key: "checkout-flow-2026", ExposureEvent: "exposure", Control: "control",
			Arms: []string{"control", "one-page", "saved-basket"}, Start: &start, End: &end,
			Metrics: []experiment.Metric{metric("purchase", 7*24*time.Hour, "purchase")},
		}}}}
}

func benchRounds() int {
	if n, err := strconv.Atoi(os.Getenv("WAREHOUSE_BENCH_ROUNDS")); err == nil && n > 0 {
		return n
	}
	return 3
}

func median(xs []float64) float64 {
	s := slices.Clone(xs)
	slices.Sort(s)
	if len(s)%2 == 1 {
		return s[len(s)/2]
	}
	return (s[len(s)/2-1] + s[len(s)/2]) / 2
}

// alternate runs a and b in turn for the given rounds, checks that they
// give the same readouts each time, and reports the median seconds of
// each and their ratio.
func alternate(b *testing.B, rounds int, na, nb string, a, bb func() []byte) {
	var ta, tb []float64
	for r := 0; r < rounds; r++ {
		t0 := time.Now()
		ja := a()
		ta = append(ta, time.Since(t0).Seconds())
		t0 = time.Now()
		jb := bb()
		tb = append(tb, time.Since(t0).Seconds())
		if string(ja) != string(jb) {
			b.Fatalf("round %d: %s and %s give different readouts", r+1, na, nb)
		}
		b.Logf("round %d: %s %.2f s, %s %.2f s", r+1, na, ta[r], nb, tb[r])
	}
	b.ReportMetric(median(ta), na+"_s")
	b.ReportMetric(median(tb), nb+"_s")
	b.ReportMetric(median(tb)/median(ta), nb+"/"+na)
}

// BenchmarkDuckDBQueryVsArmtally times armtally analysing a generated
// log and the emitted DuckDB query over the same file in embedded DuckDB
// (two threads), alternated, with equal readouts checked each round.
// WAREHOUSE_BENCH_PARQUET names the log (cmd/bench writes one:
// events-u10000000-n7.9-s1.parquet); run with -benchtime 1x.
func BenchmarkDuckDBQueryVsArmtally(b *testing.B) {
	path := os.Getenv("WAREHOUSE_BENCH_PARQUET")
	if path == "" {
		b.Skip("set WAREHOUSE_BENCH_PARQUET to a log of armtally gen")
	}
	d := benchDefinition()
	db := openDuckDB(b)
	for _, s := range []string{"SET threads = 2", "CREATE VIEW events AS SELECT * FROM read_parquet(" + sqlString(path) + ")"} {
		if _, err := db.Exec(s); err != nil {
			b.Fatal(err)
		}
	}
	q := d.query(b, "events")
	text, err := q.SQL(warehouse.DuckDB)
	if err != nil {
		b.Fatal(err)
	}
	for i := 0; i < b.N; i++ {
		alternate(b, benchRounds(), "armtally", "duckdb_query",
			func() []byte { return d.armtallyJSON(b, path) },
			func() []byte { return d.warehouseJSON(b, q, runQuery(b, db, q, text)) })
	}
}

// BenchmarkPostgresSingleVsSharded loads a generated log into one
// PostgreSQL server and into a coordinator with two postgres_fdw shards,
// then times the same emitted query on each, alternated, with equal
// readouts checked each round. WAREHOUSE_BENCH_PG_PARQUET names the log
// (armtally gen --users 1000000 --parquet FILE); run with -benchtime 1x.
func BenchmarkPostgresSingleVsSharded(b *testing.B) {
	path := os.Getenv("WAREHOUSE_BENCH_PG_PARQUET")
	if path == "" {
		b.Skip("set WAREHOUSE_BENCH_PG_PARQUET to a log of armtally gen")
	}
	d := benchDefinition()
	q := d.query(b, "events")
	text, err := q.SQL(warehouse.PostgreSQL)
	if err != nil {
		b.Fatal(err)
	}
	single := startPostgres(b)
	sc := single.connect(b)
	exec1(b, sc, "CREATE TABLE events "+eventColumns)
	cc, shards := sharded(b)
	// Every server loads the same CSV, written by DuckDB from the log,
	// with COPY. The shards are loaded directly rather than row by row
	// through the coordinator's foreign partitions: the coordinator
	// copies the CSV into a local table and sends each shard the rows of
	// its hash partition (satisfies_hash_partition, the routing of the
	// partitioned table itself).
	csvPath := filepath.Join(single.dir, "events.csv")
	db := openDuckDB(b)
	if _, err := db.Exec("COPY (SELECT user_id, strftime(ts, '%Y-%m-%d %H:%M:%S.%f+00') AS ts, event, experiment, arm, platform, NULL AS country FROM read_parquet(" +
		sqlString(path) + ")) TO " + sqlString(csvPath) + " (HEADER, FORMAT CSV)"); err != nil {
		b.Fatal(err)
	}
	t0 := time.Now()
	copyCSV(b, sc, csvPath, "events")
	exec1(b, sc, "ANALYZE events")
	b.Logf("single: loaded in %.1f s", time.Since(t0).Seconds())
	t0 = time.Now()
	exec1(b, cc, "CREATE UNLOGGED TABLE events_load "+eventColumns)
	copyCSV(b, cc, csvPath, "events_load")
	for i, shard := range shards {
		route(b, cc, shard, fmt.Sprintf("SELECT * FROM events_load WHERE satisfies_hash_partition('events'::regclass, 2, %d, user_id)", i), fmt.Sprintf("events_p%d", i))
		exec1(b, shard, fmt.Sprintf("ANALYZE events_p%d", i))
	}
	// The coordinator needs its own statistics of the foreign partitions
	// (postgres_fdw's ANALYZE samples them through the shards): without
	// them it assumes a few hundred rows and joins the units with nested
	// loops, quadratic in the units.
	exec1(b, cc, "DROP TABLE events_load", "ANALYZE events")
	b.Logf("sharded: loaded in %.1f s, rows per shard %v", time.Since(t0).Seconds(), partitionRows(b, cc))
	for _, c := range []*pgx.Conn{sc, cc} {
		var plan string
		for _, row := range queryStrings(b, c, "EXPLAIN (VERBOSE) "+text) {
			plan += row + "\n"
		}
		b.Logf("plan:\n%s", plan)
	}
	want := d.armtallyJSON(b, path)
	for i := 0; i < b.N; i++ {
		alternate(b, benchRounds(), "single", "sharded",
			func() []byte { return check(b, want, d.warehouseJSON(b, q, runPG(b, sc, q, text))) },
			func() []byte { return check(b, want, d.warehouseJSON(b, q, runPG(b, cc, q, text))) })
	}
}

// copyCSV copies a CSV file with a header into the table.
func copyCSV(b *testing.B, c *pgx.Conn, path, table string) {
	f, err := os.Open(path)
	if err != nil {
		b.Fatal(err)
	}
	defer f.Close()
	if _, err := c.PgConn().CopyFrom(context.Background(), f, "COPY "+table+" FROM STDIN (FORMAT csv, HEADER true)"); err != nil {
		b.Fatal(err)
	}
}

// route streams the rows of query on from into table on to, COPY to
// COPY.
func route(b *testing.B, from, to *pgx.Conn, query, table string) {
	r, w := io.Pipe()
	done := make(chan error, 1)
	go func() {
		_, err := from.PgConn().CopyTo(context.Background(), w, "COPY ("+query+") TO STDOUT")
		w.CloseWithError(err)
		done <- err
	}()
	if _, err := to.PgConn().CopyFrom(context.Background(), r, "COPY "+table+" FROM STDIN"); err != nil {
		r.CloseWithError(err)
		<-done
		b.Fatal(err)
	}
	if err := <-done; err != nil {
		b.Fatal(err)
	}
}

// queryStrings returns the first column of each row of a query.
func queryStrings(b *testing.B, c *pgx.Conn, query string) []string {
	rows, err := c.Query(context.Background(), query)
	if err != nil {
		b.Fatal(err)
	}
	out, err := pgx.CollectRows(rows, pgx.RowTo[string])
	if err != nil {
		b.Fatal(err)
	}
	return out
}

// check fails the benchmark when got is not armtally's readout.
func check(b *testing.B, want, got []byte) []byte {
	if string(want) != string(got) {
		b.Fatal(fmt.Errorf("the query's readout differs from armtally's"))
	}
	return got
}
