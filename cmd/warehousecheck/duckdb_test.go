package warehousecheck

import (
	"context"
	"database/sql"
	"strings"
	"testing"

	_ "github.com/duckdb/duckdb-go/v2"

	"github.com/armtally/armtally/experiment/warehouse"
)

// openDuckDB opens an in-memory DuckDB.
func openDuckDB(t testing.TB) *sql.DB {
	t.Helper()
	db, err := sql.Open("duckdb", "")
	if err != nil {
		t.Fatal(err)
	}
	db.SetMaxOpenConns(1)
	t.Cleanup(func() { db.Close() })
	return db
}

// runQuery runs a query of q through database/sql and scans its rows.
func runQuery(t testing.TB, db *sql.DB, q *warehouse.Query, text string) []*warehouse.Row {
	t.Helper()
	rs, err := db.QueryContext(context.Background(), text)
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
		t.Fatal(err)
	}
	return rows
}

func sqlString(s string) string { return "'" + strings.ReplaceAll(s, "'", "''") + "'" }

// TestDuckDBEqualsArmtally runs each definition's DuckDB query over
// generated Parquet logs in embedded DuckDB and checks that the readout
// made from its counts is byte for byte armtally's readout of the same
// file: counts, diagnostics, arms, segments, freshness.
func TestDuckDBEqualsArmtally(t *testing.T) {
	for _, seed := range []uint64{1, 2, 3} {
		path := writeLog(t, t.TempDir(), genRows(seed, 1500))
		db := openDuckDB(t)
		if _, err := db.Exec("CREATE VIEW events AS SELECT * FROM read_parquet(" + sqlString(path) + ")"); err != nil {
			t.Fatal(err)
		}
		for _, d := range definitions() {
			q := d.query(t, "events")
			text, err := q.SQL(warehouse.DuckDB)
			if err != nil {
				t.Fatal(err)
			}
			got := d.warehouseJSON(t, q, runQuery(t, db, q, text))
			sameReadouts(t, d.name, d.armtallyJSON(t, path), got)
		}
	}
}
