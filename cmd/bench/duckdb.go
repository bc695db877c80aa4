package main

import (
	"context"
	"database/sql"
	"encoding/json"
	"fmt"
	"io"
	"slices"
	"strings"
	"time"

	"github.com/spf13/pflag"

	// The DuckDB driver for database/sql (cgo).
	_ "github.com/duckdb/duckdb-go/v2"
)

// analysis is the experiment every run analyses: the generated log's
// experiment, three arms, one conversion metric with a 7-day window, a
// window that leaves out the first day of exposures and ends before the
// last units' windows close, multi-arm units excluded and immature units
// excluded.
type analysis struct {
	Experiment    string
	ExposureEvent string
	Control       string
	Arms          []string
	Start, End    time.Time
	Metric        string   // metric name
	Events        []string // the metric's events
	Window        time.Duration
}

// defaultAnalysis returns the analysis the bench runs.
func defaultAnalysis() analysis {
	return analysis{
		Experiment:    "checkout-flow-2026",
		ExposureEvent: "exposure",
		Control:       "control",
		Arms:          []string{"control", "one-page", "saved-basket"},
		Start:         time.Date(2026, time.November, 3, 0, 0, 0, 0, time.UTC),
		End:           time.Date(2026, time.November, 19, 0, 0, 0, 0, time.UTC),
		Metric:        "purchase",
		Events:        []string{"purchase"},
		Window:        7 * 24 * time.Hour,
	}
}

// armtallyArgs returns the arguments of `armtally analyze` for a over file,
// writing the JSON readout to jsonPath and the Markdown one to mdPath.
func (a analysis) armtallyArgs(file, jsonPath, mdPath string) []string {
	return []string{"analyze", file,
		"--experiment", a.Experiment,
		"--exposure-event", a.ExposureEvent,
		"--control", a.Control,
		"--arms", strings.Join(a.Arms, ","),
		"--start", a.Start.Format(time.RFC3339),
		"--end", a.End.Format(time.RFC3339),
		"--metric", fmt.Sprintf("%s=%s:%dd", a.Metric, strings.Join(a.Events, ","), int64(a.Window/(24*time.Hour))),
		"--multi-arm", "exclude",
		"--maturity", "exclude",
		"--json", jsonPath,
		"--out", mdPath,
	}
}

// counts are the per-arm sufficient statistics both implementations must
// agree on exactly.
type counts struct {
	Arms          []armCounts `json:"arms"`
	MultiArmUnits int64       `json:"multi_arm_units"`
	UnitsExposed  int64       `json:"units_exposed"`
}

// armCounts are one arm's counts for the one metric.
type armCounts struct {
	Arm string `json:"arm"`
	// Units is the arm's analysis population after the multi-arm policy.
	Units int64 `json:"units"`
	// MetricUnits, Conversions and Immature are the metric's mature units,
	// their conversions and the immature units left out.
	MetricUnits int64 `json:"metric_units"`
	Conversions int64 `json:"conversions"`
	Immature    int64 `json:"immature_units"`
}

// sqlString quotes s as an SQL string literal.
func sqlString(s string) string { return "'" + strings.ReplaceAll(s, "'", "''") + "'" }

// sourceSQL returns the table function that reads file in format.
func sourceSQL(file, format string) (string, error) {
	switch format {
	case "parquet":
		return "read_parquet(" + sqlString(file) + ")", nil
	case "csv":
		// The columns as sampledata.WriteCSV writes them; an empty field
		// is NULL.
		return "read_csv(" + sqlString(file) + ", header = true, delim = ',', quote = '\"'," +
			" columns = {'user_id': 'VARCHAR', 'ts': 'TIMESTAMPTZ', 'event': 'VARCHAR'," +
			" 'experiment': 'VARCHAR', 'arm': 'VARCHAR', 'platform': 'VARCHAR'})", nil
	}
	return "", fmt.Errorf("unknown format %q (want parquet or csv)", format)
}

// openDuckDB opens an in-memory DuckDB with the given number of threads and
// UTC as its time zone.
func openDuckDB(threads int) (*sql.DB, error) {
	db, err := sql.Open("duckdb", "")
	if err != nil {
		return nil, fmt.Errorf("open duckdb: %w", err)
	}
	db.SetMaxOpenConns(1) // temp tables live in one connection
	for _, s := range []string{
		fmt.Sprintf("SET threads = %d", threads),
		"SET TimeZone = 'UTC'",
	} {
		if _, err := db.Exec(s); err != nil {
			db.Close()
			return nil, fmt.Errorf("duckdb: %s: %w", s, err)
		}
	}
	return db, nil
}

// duckdbVersion returns DuckDB's version string.
func duckdbVersion() (string, error) {
	db, err := openDuckDB(1)
	if err != nil {
		return "", err
	}
	defer db.Close()
	var v string
	if err := db.QueryRow("SELECT version()").Scan(&v); err != nil {
		return "", fmt.Errorf("duckdb version: %w", err)
	}
	return v, nil
}

// duckdbAnalyze computes the counts of a over src (a table function) in
// DuckDB. The SQL is the independent implementation of the event semantics
// in cmd/armtally/testdata/crosscheck/crosscheck.mjs, ported statement by
// statement (minus its extra diagnostic scans): valid rows; one row per
// unit with an in-window exposure (t0, the arm at t0, the number of
// distinct arms); single-arm units crossed with the metric; conversions as
// a join of those units with the metric's events inside [t0, t0 + W) and
// before the end; per arm, mature units, conversions and immature units.
// Times are compared as integer microseconds since the Unix epoch.
func duckdbAnalyze(ctx context.Context, db *sql.DB, src string, a analysis) (counts, error) {
	conn, err := db.Conn(ctx)
	if err != nil {
		return counts{}, fmt.Errorf("duckdb: %w", err)
	}
	defer conn.Close()
	startUs, endUs := a.Start.UnixMicro(), a.End.UnixMicro()
	var values []string
	for _, ev := range a.Events {
		values = append(values, fmt.Sprintf("(%s, %s)", sqlString(a.Metric), sqlString(ev)))
	}
	stmts := []string{
		`CREATE OR REPLACE TEMP TABLE metric_def (ord INTEGER, metric VARCHAR, window_us BIGINT)`,
		fmt.Sprintf(`INSERT INTO metric_def VALUES (0, %s, %d)`, sqlString(a.Metric), a.Window.Microseconds()),
		`CREATE OR REPLACE TEMP TABLE metric_event (metric VARCHAR, event VARCHAR)`,
		`INSERT INTO metric_event VALUES ` + strings.Join(values, ", "),
		`CREATE OR REPLACE TEMP VIEW log AS
		 SELECT user_id AS u, epoch_us(ts) AS t, event, experiment, arm
		 FROM ` + src + `
		 WHERE user_id IS NOT NULL AND user_id <> '' AND ts IS NOT NULL`,
		fmt.Sprintf(`CREATE OR REPLACE TEMP TABLE unit AS
		 SELECT u,
		        min(t)              AS t0,
		        arg_min(arm, t)     AS arm,
		        count(DISTINCT arm) AS n_arms
		 FROM log
		 WHERE event = %s AND experiment = %s
		   AND arm IS NOT NULL AND arm <> ''
		   AND t >= %d AND t < %d
		 GROUP BY u`, sqlString(a.ExposureEvent), sqlString(a.Experiment), startUs, endUs),
	}
	for _, s := range stmts {
		if _, err := conn.ExecContext(ctx, s); err != nil {
			return counts{}, fmt.Errorf("duckdb: %w\n%s", err, s)
		}
	}
	tallySQL := fmt.Sprintf(`WITH analysed AS (
	   SELECT u, t0, arm FROM unit WHERE n_arms = 1
	 ),
	 unit_metric AS (
	   SELECT a.u, a.arm, a.t0, d.metric, d.window_us,
	          (a.t0 + d.window_us > %[1]d) AS immature
	   FROM analysed a CROSS JOIN metric_def d
	 ),
	 metric_rows AS (
	   SELECT l.u, l.t, me.metric
	   FROM log l JOIN metric_event me ON l.event = me.event
	   WHERE l.t < %[1]d
	 ),
	 converted AS (
	   SELECT DISTINCT um.u, um.metric
	   FROM unit_metric um
	   JOIN metric_rows r ON r.u = um.u AND r.metric = um.metric
	   WHERE NOT um.immature
	     AND r.t >= um.t0 AND r.t < um.t0 + um.window_us
	 )
	 SELECT um.arm,
	        count(*)                                  AS units,
	        count(*) FILTER (WHERE NOT um.immature)   AS metric_units,
	        count(*) FILTER (WHERE c.u IS NOT NULL)   AS conversions,
	        count(*) FILTER (WHERE um.immature)       AS immature
	 FROM unit_metric um
	 LEFT JOIN converted c ON c.u = um.u AND c.metric = um.metric
	 GROUP BY um.arm
	 ORDER BY um.arm`, endUs)
	rows, err := conn.QueryContext(ctx, tallySQL)
	if err != nil {
		return counts{}, fmt.Errorf("duckdb: %w\n%s", err, tallySQL)
	}
	var out counts
	for rows.Next() {
		var c armCounts
		if err := rows.Scan(&c.Arm, &c.Units, &c.MetricUnits, &c.Conversions, &c.Immature); err != nil {
			rows.Close()
			return counts{}, fmt.Errorf("duckdb: scan tally: %w", err)
		}
		out.Arms = append(out.Arms, c)
	}
	if err := rows.Err(); err != nil {
		return counts{}, fmt.Errorf("duckdb: tally: %w", err)
	}
	rows.Close()
	err = conn.QueryRowContext(ctx, `SELECT count(*), count(*) FILTER (WHERE n_arms > 1) FROM unit`).
		Scan(&out.UnitsExposed, &out.MultiArmUnits)
	if err != nil {
		return counts{}, fmt.Errorf("duckdb: unit totals: %w", err)
	}
	return out, nil
}

// duckdbAnalyzeOnePass computes the same counts as duckdbAnalyze with SQL
// written for speed rather than as a port: one scan of the rows whose event
// is the exposure or a metric event, one aggregation per unit (t0, the arm
// at t0 and the number of distinct arms over the in-window exposures, and
// the list of the unit's metric-event times before the end), then per arm
// the units whose list has a time in [t0, t0 + W).
func duckdbAnalyzeOnePass(ctx context.Context, db *sql.DB, src string, a analysis) (counts, error) {
	startUs, endUs, winUs := a.Start.UnixMicro(), a.End.UnixMicro(), a.Window.Microseconds()
	var evs []string
	for _, ev := range a.Events {
		evs = append(evs, sqlString(ev))
	}
	metricEvents := strings.Join(evs, ", ")
	exposure := fmt.Sprintf(`event = %s AND experiment = %s AND arm IS NOT NULL AND arm <> '' AND t >= %d AND t < %d`,
		sqlString(a.ExposureEvent), sqlString(a.Experiment), startUs, endUs)
	q := fmt.Sprintf(`WITH r AS (
	   SELECT user_id AS u, epoch_us(ts) AS t, event, experiment, arm
	   FROM %[1]s
	   WHERE user_id IS NOT NULL AND user_id <> '' AND ts IS NOT NULL
	     AND event IN (%[2]s, %[3]s)
	 ),
	 per_unit AS (
	   SELECT u,
	          min(t)              FILTER (WHERE %[4]s) AS t0,
	          arg_min(arm, t)     FILTER (WHERE %[4]s) AS arm,
	          count(DISTINCT arm) FILTER (WHERE %[4]s) AS n_arms,
	          list(t) FILTER (WHERE event IN (%[3]s) AND t < %[5]d) AS mts
	   FROM r
	   GROUP BY u
	 )
	 SELECT arm,
	        count(*) FILTER (WHERE n_arms = 1) AS units,
	        count(*) FILTER (WHERE n_arms = 1 AND t0 + %[6]d <= %[5]d) AS metric_units,
	        count(*) FILTER (WHERE n_arms = 1 AND t0 + %[6]d <= %[5]d
	                           AND len(list_filter(mts, x -> x >= t0 AND x < t0 + %[6]d)) > 0) AS conversions,
	        count(*) FILTER (WHERE n_arms = 1 AND t0 + %[6]d > %[5]d) AS immature,
	        count(*) FILTER (WHERE n_arms > 1) AS multi,
	        count(*) AS exposed
	 FROM per_unit
	 WHERE n_arms >= 1
	 GROUP BY arm
	 ORDER BY arm`, src, sqlString(a.ExposureEvent), metricEvents, exposure, endUs, winUs)
	rows, err := db.QueryContext(ctx, q)
	if err != nil {
		return counts{}, fmt.Errorf("duckdb: %w\n%s", err, q)
	}
	defer rows.Close()
	var out counts
	for rows.Next() {
		var c armCounts
		var multi, exposed int64
		if err := rows.Scan(&c.Arm, &c.Units, &c.MetricUnits, &c.Conversions, &c.Immature, &multi, &exposed); err != nil {
			return counts{}, fmt.Errorf("duckdb: scan tally: %w", err)
		}
		out.MultiArmUnits += multi
		out.UnitsExposed += exposed
		if c.Units > 0 { // the port lists arms of single-arm units only
			out.Arms = append(out.Arms, c)
		}
	}
	if err := rows.Err(); err != nil {
		return counts{}, fmt.Errorf("duckdb: tally: %w", err)
	}
	return out, nil
}

// scanResult is what the scan-floor query returns.
type scanResult struct {
	Rows int64  `json:"rows"`
	Hash string `json:"hash"`
}

// duckdbScan reads the five columns the analysis needs (user_id, ts,
// event, experiment, arm) from src and folds every value into a count, the
// time range and a hash sum: the least DuckDB must do to read them.
func duckdbScan(ctx context.Context, db *sql.DB, src string) (scanResult, error) {
	q := `SELECT count(*), CAST(min(ts) AS VARCHAR) || '/' || CAST(max(ts) AS VARCHAR) || '/' ||
	        CAST(sum(hash(user_id, event, experiment, arm)) AS VARCHAR)
	      FROM ` + src
	var r scanResult
	if err := db.QueryRowContext(ctx, q).Scan(&r.Rows, &r.Hash); err != nil {
		return r, fmt.Errorf("duckdb scan: %w", err)
	}
	return r, nil
}

// childResult is the JSON a duckdb-query child prints.
type childResult struct {
	Counts       *counts     `json:"counts,omitempty"`
	Scan         *scanResult `json:"scan,omitempty"`
	QuerySeconds float64     `json:"query_seconds"`
}

// runDuckDBQuery is the duckdb-query mode: the bench runs itself as a child
// in this mode so that DuckDB's wall time and peak memory are measured the
// same way as armtally's. It prints one childResult as JSON.
func runDuckDBQuery(args []string, stdout, stderr io.Writer) error {
	fs := pflag.NewFlagSet("duckdb-query", pflag.ContinueOnError)
	fs.SetOutput(stderr)
	file := fs.String("file", "", "event log to read")
	format := fs.String("format", "parquet", "format of --file: parquet or csv")
	query := fs.String("query", "analyze", "query: analyze (the experiment's counts, SQL ported from crosscheck.mjs), analyze-1pass (the same counts, one-scan SQL) or scan (read the needed columns)")
	threads := fs.Int("threads", 2, "DuckDB threads")
	if err := fs.Parse(args); err != nil {
		return err
	}
	if *file == "" {
		return fmt.Errorf("duckdb-query: --file is required")
	}
	src, err := sourceSQL(*file, *format)
	if err != nil {
		return fmt.Errorf("duckdb-query: %w", err)
	}
	db, err := openDuckDB(*threads)
	if err != nil {
		return err
	}
	defer db.Close()
	ctx := context.Background()
	start := time.Now()
	var res childResult
	switch *query {
	case "analyze":
		c, err := duckdbAnalyze(ctx, db, src, defaultAnalysis())
		if err != nil {
			return err
		}
		res.Counts = &c
	case "analyze-1pass":
		c, err := duckdbAnalyzeOnePass(ctx, db, src, defaultAnalysis())
		if err != nil {
			return err
		}
		res.Counts = &c
	case "scan":
		s, err := duckdbScan(ctx, db, src)
		if err != nil {
			return err
		}
		res.Scan = &s
	default:
		return fmt.Errorf("duckdb-query: unknown --query %q (want analyze, analyze-1pass or scan)", *query)
	}
	res.QuerySeconds = time.Since(start).Seconds()
	enc := json.NewEncoder(stdout)
	enc.SetIndent("", "  ")
	if err := enc.Encode(res); err != nil {
		return fmt.Errorf("duckdb-query: %w", err)
	}
	return nil
}

// readoutJSON is the part of armtally's JSON readout the bench compares.
type readoutJSON struct {
	Readouts []struct {
		Arms []struct {
			Name  string `json:"arm"` // "name" before schema 2.1.0
			Units int64  `json:"units"`
		} `json:"arms"`
		Metrics []struct {
			Name string `json:"name"`
			Arms []struct {
				Arm         string `json:"arm"`
				Units       int64  `json:"units"`
				Conversions int64  `json:"conversions"`
				Immature    int64  `json:"immature_units"`
			} `json:"arms"`
		} `json:"metrics"`
		Diagnostics struct {
			RowsRead      int64 `json:"rows_read"`
			UnitsExposed  int64 `json:"units_exposed"`
			MultiArmUnits int64 `json:"multi_arm_units"`
		} `json:"diagnostics"`
	} `json:"readouts"`
}

// armtallyCounts extracts the counts of metric from armtally's JSON
// readout, arms sorted by name as DuckDB returns them, and the rows read.
func armtallyCounts(data []byte, metric string) (counts, int64, error) {
	var r readoutJSON
	if err := json.Unmarshal(data, &r); err != nil {
		return counts{}, 0, fmt.Errorf("armtally readout: %w", err)
	}
	if len(r.Readouts) != 1 {
		return counts{}, 0, fmt.Errorf("armtally readout: %d readouts, want 1", len(r.Readouts))
	}
	ro := r.Readouts[0]
	out := counts{MultiArmUnits: ro.Diagnostics.MultiArmUnits, UnitsExposed: ro.Diagnostics.UnitsExposed}
	units := map[string]int64{}
	for _, a := range ro.Arms {
		units[a.Name] = a.Units
	}
	found := false
	for _, m := range ro.Metrics {
		if m.Name != metric {
			continue
		}
		found = true
		for _, a := range m.Arms {
			out.Arms = append(out.Arms, armCounts{Arm: a.Arm, Units: units[a.Arm],
				MetricUnits: a.Units, Conversions: a.Conversions, Immature: a.Immature})
		}
	}
	if !found {
		return counts{}, 0, fmt.Errorf("armtally readout: no metric %q", metric)
	}
	slices.SortFunc(out.Arms, func(x, y armCounts) int { return strings.Compare(x.Arm, y.Arm) })
	return out, ro.Diagnostics.RowsRead, nil
}

// compareCounts returns nil when got and want agree exactly, else an error
// listing every difference.
func compareCounts(armtally, duckdb counts) error {
	var diffs []string
	if armtally.MultiArmUnits != duckdb.MultiArmUnits {
		diffs = append(diffs, fmt.Sprintf("multi-arm units: armtally %d, duckdb %d", armtally.MultiArmUnits, duckdb.MultiArmUnits))
	}
	if armtally.UnitsExposed != duckdb.UnitsExposed {
		diffs = append(diffs, fmt.Sprintf("units exposed: armtally %d, duckdb %d", armtally.UnitsExposed, duckdb.UnitsExposed))
	}
	if len(armtally.Arms) != len(duckdb.Arms) {
		diffs = append(diffs, fmt.Sprintf("arms: armtally %d, duckdb %d", len(armtally.Arms), len(duckdb.Arms)))
	} else {
		for i := range armtally.Arms {
			if armtally.Arms[i] != duckdb.Arms[i] {
				diffs = append(diffs, fmt.Sprintf("arm: armtally %+v, duckdb %+v", armtally.Arms[i], duckdb.Arms[i]))
			}
		}
	}
	if len(diffs) > 0 {
		return fmt.Errorf("armtally and duckdb disagree:\n  %s", strings.Join(diffs, "\n  "))
	}
	return nil
}
