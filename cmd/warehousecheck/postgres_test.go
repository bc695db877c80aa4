package warehousecheck

import (
	"context"
	"testing"

	"github.com/jackc/pgx/v5"

	"github.com/armtally/armtally/experiment/warehouse"
)

// runPG runs a query of q on a PostgreSQL connection and scans its rows.
func runPG(t testing.TB, c *pgx.Conn, q *warehouse.Query, text string) []*warehouse.Row {
	t.Helper()
	rs, err := c.Query(context.Background(), text)
	if err != nil {
		t.Fatalf("query failed: %v\n%s", err, text)
	}
	defer rs.Close()
	var rows []*warehouse.Row
	for rs.Next() {
		r := q.NewRow()
		if err := rs.Scan(r.Targets()...); err != nil {
			t.Fatal(err)
		}
		rows = append(rows, r)
	}
	if err := rs.Err(); err != nil {
		t.Fatalf("query failed: %v\n%s", err, text)
	}
	return rows
}

// checkPG runs every definition's PostgreSQL query on c (whose table
// events holds rows) and compares the readouts with armtally's of the
// same rows in a Parquet file.
func checkPG(t *testing.T, c *pgx.Conn, path string) {
	for _, d := range definitions() {
		q := d.query(t, "events")
		text, err := q.SQL(warehouse.PostgreSQL)
		if err != nil {
			t.Fatal(err)
		}
		sameReadouts(t, d.name, d.armtallyJSON(t, path), d.warehouseJSON(t, q, runPG(t, c, q, text)))
	}
}

// TestPostgresEqualsArmtally loads generated logs into a PostgreSQL 15
// server with COPY and checks that each definition's PostgreSQL query
// gives armtally's readout of the same rows exactly.
func TestPostgresEqualsArmtally(t *testing.T) {
	s := startPostgres(t)
	c := s.connect(t)
	for _, seed := range []uint64{4, 5} {
		rows := genRows(seed, 1500)
		path := writeLog(t, t.TempDir(), rows)
		exec1(t, c, "DROP TABLE IF EXISTS events", "CREATE TABLE events "+eventColumns)
		load(t, c, "events", rows)
		checkPG(t, c, path)
	}
}

// TestShardedPostgresEqualsArmtally runs the same queries, unchanged, on
// a coordinator whose events table is hash-partitioned by unit across
// two shard servers (declarative partitioning, postgres_fdw foreign
// partitions): the counts are armtally's again, so the query needs
// nothing of one machine.
func TestShardedPostgresEqualsArmtally(t *testing.T) {
	c, _ := sharded(t)
	rows := genRows(6, 1500)
	path := writeLog(t, t.TempDir(), rows)
	load(t, c, "events", rows)
	parts := partitionRows(t, c)
	if parts[0] == 0 || parts[1] == 0 || parts[0]+parts[1] != int64(len(rows)) {
		t.Fatalf("rows per shard %v, want both non-empty and %d in all", parts, len(rows))
	}
	checkPG(t, c, path)
}
