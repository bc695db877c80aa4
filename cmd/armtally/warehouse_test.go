package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestSQLCommand checks the sql command's use of the analyze flags and
// spec file: the query it writes names the mapped columns, the table's
// parts and the experiments' names in the dialect's forms (the query
// itself is held by experiment/warehouse's golden files and run on
// DuckDB and PostgreSQL by cmd/warehousecheck).
func TestSQLCommand(t *testing.T) {
	code, out, errOut := runCmd(t, "sql", "--table", "analytics.events", "--dialect", "spark",
		"--experiment", "checkout", "--metric", "purchase=purchase,order:7d", "--user-col", "visitor",
		"--segment", "platform", "--start", "2026-11-02", "--multi-arm", "first")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	for _, want := range []string{"FROM `analytics`.`events` t", "CAST(`visitor` AS STRING)", "'checkout'",
		"IN ('purchase', 'order')", "INTERVAL '604800.000000' SECOND", "TIMESTAMP '2026-11-02 00:00:00.000000Z'",
		"AS `platform`", "(f.w_tied = 0)"} {
		if !strings.Contains(out, want) {
			t.Errorf("query lacks %q", want)
		}
	}
	if !strings.HasSuffix(out, ";\n") {
		t.Error("query does not end with a semicolon")
	}
	path := filepath.Join(t.TempDir(), "q.sql")
	if code, _, errOut := runCmd(t, "sql", "--table", "ev", "--metric", "p=purchase", "--out", path); code != exitOK {
		t.Fatalf("--out: exit %d: %s", code, errOut)
	}
	if b, err := os.ReadFile(path); err != nil || !strings.Contains(string(b), "postgres dialect") {
		t.Errorf("--out file: %v, %.80q", err, b)
	}
}

func TestSQLCommandErrors(t *testing.T) {
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"sql", "--metric", "p=purchase"}, "--table NAME is required"},
		{[]string{"sql", "--table", "ev", "--metric", "p=purchase", "--dialect", "mysql"}, "unknown SQL dialect"},
		{[]string{"sql", "--table", "a..b", "--metric", "p=purchase"}, "empty part"},
		{[]string{"sql", "--table", "ev", "--metric", "p=purchase", "events.parquet"}, "not files"},
		{[]string{"sql", "--table", "ev", "--metric", "p=purchase", "--json", "x.json"}, "--json does not apply"},
		{[]string{"sql", "--table", "ev", "--metric", "p=purchase", "--epoch-unit", "ms"}, "timestamp column"},
		{[]string{"sql", "--table", "ev", "--metric", "p=purchase", "--segment", "units"}, "result column"},
		{[]string{"sql", "--table", "ev", "--metric", "p=purchase:1500ns", "--dialect", "trino"}, "window"},
		{[]string{"analyze", "--table", "ev", "--metric", "p=purchase"}, "give --postgres URL too"},
		{[]string{"analyze", "--postgres", "postgres://127.0.0.1:1/x", "--metric", "p=purchase"}, "--postgres needs --table"},
		{[]string{"analyze", "--postgres", "postgres://127.0.0.1:1/x", "--table", "ev", "--metric", "p=purchase", "f.parquet"}, "not files"},
		{[]string{"analyze", "--postgres", "postgres://127.0.0.1:1/x", "--table", "ev", "--metric", "p=purchase", "--audit", "a.parquet"}, "--audit does not apply"},
	} {
		code, _, errOut := runCmd(t, tc.args...)
		if code != exitUsage || !strings.Contains(errOut, tc.want) {
			t.Errorf("%v: exit %d, %q; want exit 2 and %q", tc.args, code, errOut, tc.want)
		}
	}
	// A server that does not answer is a data error (exit 3).
	code, _, errOut := runCmd(t, "analyze", "--postgres", "postgres://postgres@127.0.0.1:1/x?connect_timeout=5", "--table", "ev", "--metric", "p=purchase")
	if code != exitData || !strings.Contains(errOut, "--postgres") {
		t.Errorf("unreachable server: exit %d, %q; want exit 3", code, errOut)
	}
}
