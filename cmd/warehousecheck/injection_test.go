package warehousecheck

import (
	"context"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/pipeline"
	"github.com/armtally/armtally/experiment/warehouse"
)

// Names that would break or inject into a query quoted carelessly:
// quotes of every kind, backslashes, statement separators, comment
// starts and non-ASCII text.
var (
	hostileTable = []string{`ev"ents; DROP TABLE canary; --`}
	hostileCols  = warehouse.Columns{
		User:       `u'ser"";--\`,
		TS:         "t s ü`",
		Event:      `ev;ent'); DROP TABLE canary; --`,
		Experiment: "exp`x\\",
		Arm:        `arm\'"`,
	}
	hostileSegment = `plat'form"; --`
	hostileEvent   = `pur'chase"; DROP TABLE canary; --\`
)

// hostileDefinition is a definition whose every name needs quoting.
func hostileDefinition() definition {
	opts := experiment.DefaultAnalysisOptions()
	return definition{name: "hostile names", cols: hostileCols, exps: []pipeline.Experiment{{Options: opts, Spec: experiment.Spec{
		Key: "search;DROP TABLE x", ExposureEvent: "exposure", Control: "control",
		Arms:     []string{"control", "treatment", weirdArm},
		Start:    tp(day(1)),
		Metrics:  []experiment.Metric{metric(`m'"\; --`, 3*24*time.Hour, hostileEvent, "signup")},
		Segments: []string{hostileSegment},
	}}}}
}

// duckIdent quotes a DuckDB identifier by the SQL standard's rule, written
// here apart from the package under test.
func duckIdent(s string) string { return `"` + strings.ReplaceAll(s, `"`, `""`) + `"` }

// hostileSelect renames the generated log's columns to the hostile names
// and its purchase events to hostileEvent.
func hostileSelect(from string) string {
	return "SELECT user_id AS " + duckIdent(hostileCols.User) + ", ts AS " + duckIdent(hostileCols.TS) +
		", CASE WHEN event = 'purchase' THEN " + sqlString(hostileEvent) + " ELSE event END AS " + duckIdent(hostileCols.Event) +
		", experiment AS " + duckIdent(hostileCols.Experiment) + ", arm AS " + duckIdent(hostileCols.Arm) +
		", platform AS " + duckIdent(hostileSegment) + " FROM " + from
}

// TestHostileNamesDuckDB runs the query of hostileDefinition on DuckDB:
// it must run, leave the canary table alone and give armtally's readout
// of the same rows.
func TestHostileNamesDuckDB(t *testing.T) {
	dir := t.TempDir()
	src := writeLog(t, dir, genRows(7, 800))
	path := filepath.Join(dir, "hostile.parquet")
	db := openDuckDB(t)
	for _, s := range []string{
		"COPY (" + hostileSelect("read_parquet("+sqlString(src)+")") + ") TO " + sqlString(path) + " (FORMAT PARQUET)",
		"CREATE TABLE canary (x INTEGER)",
		"CREATE VIEW " + duckIdent(hostileTable[0]) + " AS SELECT * FROM read_parquet(" + sqlString(path) + ")",
	} {
		if _, err := db.Exec(s); err != nil {
			t.Fatalf("%v\n%s", err, s)
		}
	}
	d := hostileDefinition()
	q := d.query(t, hostileTable...)
	text, err := q.SQL(warehouse.DuckDB)
	if err != nil {
		t.Fatal(err)
	}
	got := d.warehouseJSON(t, q, runQuery(t, db, q, text))
	sameReadouts(t, d.name, d.armtallyJSON(t, path), got)
	if _, err := db.Exec("SELECT count(*) FROM canary"); err != nil {
		t.Fatalf("the canary table is gone: %v", err)
	}
}

// TestHostileNamesPostgres does the same on PostgreSQL.
func TestHostileNamesPostgres(t *testing.T) {
	s := startPostgres(t)
	c := s.connect(t)
	dir := t.TempDir()
	rows := genRows(8, 800)
	src := writeLog(t, dir, rows)
	path := filepath.Join(dir, "hostile.parquet")
	db := openDuckDB(t)
	if _, err := db.Exec("COPY (" + hostileSelect("read_parquet("+sqlString(src)+")") + ") TO " + sqlString(path) + " (FORMAT PARQUET)"); err != nil {
		t.Fatal(err)
	}
	cols := []string{hostileCols.User, hostileCols.TS, hostileCols.Event, hostileCols.Experiment, hostileCols.Arm, hostileSegment}
	ident := func(s string) string { return pgx.Identifier{s}.Sanitize() }
	exec1(t, c, "CREATE TABLE canary (x integer)",
		"CREATE TABLE "+ident(hostileTable[0])+" ("+ident(cols[0])+" text, "+ident(cols[1])+" timestamptz, "+ident(cols[2])+" text, "+
			ident(cols[3])+" text, "+ident(cols[4])+" text, "+ident(cols[5])+" text)")
	copyRows := pgx.CopyFromSlice(len(rows), func(i int) ([]any, error) {
		r := rows[i]
		var ts any
		if r.TS != nil {
			ts = time.UnixMicro(*r.TS).UTC()
		}
		ev := r.Event
		if ev != nil && *ev == "purchase" {
			ev = &hostileEvent
		}
		return []any{r.User, ts, ev, r.Experiment, r.Arm, r.Platform}, nil
	})
	if _, err := c.CopyFrom(context.Background(), pgx.Identifier{hostileTable[0]}, cols, copyRows); err != nil {
		t.Fatal(err)
	}
	d := hostileDefinition()
	q := d.query(t, hostileTable...)
	text, err := q.SQL(warehouse.PostgreSQL)
	if err != nil {
		t.Fatal(err)
	}
	sameReadouts(t, d.name, d.armtallyJSON(t, path), d.warehouseJSON(t, q, runPG(t, c, q, text)))
	exec1(t, c, "SELECT count(*) FROM canary")
}
