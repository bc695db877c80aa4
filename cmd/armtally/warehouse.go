package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"

	"github.com/jackc/pgx/v5"
	"github.com/spf13/pflag"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/pipeline"
	"github.com/armtally/armtally/experiment/specfile"
	"github.com/armtally/armtally/experiment/warehouse"
)

// warehouseFlags are the flags that take an experiment to a SQL table:
// --table (sql and analyze) and --postgres (analyze).
type warehouseFlags struct {
	table, postgres string
}

// defineWarehouseFlags defines --table and --postgres on fs.
func defineWarehouseFlags(fs *pflag.FlagSet, w *warehouseFlags) {
	fs.StringVar(&w.table, "table", "", "the event table in a SQL database, schema.table (dots separate the parts; each is quoted): read with --postgres, or written as a query by armtally sql")
	fs.StringVar(&w.postgres, "postgres", "", "run the query of the experiments on this PostgreSQL server (a postgres:// URL or key=value string) over --table, instead of reading files")
}

// tableParts splits a --table value into its dotted parts.
func tableParts(s string) ([]string, error) {
	parts := strings.Split(s, ".")
	for _, p := range parts {
		if p == "" {
			return nil, fmt.Errorf("--table %q: an empty part between dots", s)
		}
	}
	return parts, nil
}

// warehouseDefinition is the query definition of a run over a table.
func warehouseDefinition(run *analyzeRun, table string) (warehouse.Definition, error) {
	if run.shape != experiment.InputEventLog {
		return warehouse.Definition{}, usagef("a SQL table is read as an event log, not a %s (input.shape)", run.shape)
	}
	if run.mapping.EpochUnit != "" {
		return warehouse.Definition{}, usagef("--epoch-unit: the query reads a timestamp column; convert integer times in the table first")
	}
	parts, err := tableParts(table)
	if err != nil {
		return warehouse.Definition{}, usagef("%v", err)
	}
	m := run.mapping
	def := warehouse.Definition{Table: parts, Columns: warehouse.Columns{User: m.User, TS: m.TS, Event: m.Event, Experiment: m.Experiment, Arm: m.Arm}}
	for _, e := range run.experiments {
		def.Experiments = append(def.Experiments, e.spec)
	}
	return def, nil
}

// applyWarehouse finishes parsing an analyze command line with
// --postgres: no input files, and outputs checked against the spec file
// only. It reports whether the run reads a PostgreSQL table.
func applyWarehouse(fs *pflag.FlagSet, f *analyzeFlags, run *analyzeRun) (bool, error) {
	w := f.warehouse
	if w.postgres == "" {
		if w.table != "" {
			return false, usagef("analyze: --table names a table of a database: give --postgres URL too (or write the query with armtally sql)")
		}
		return false, nil
	}
	if w.table == "" {
		return false, usagef("analyze: --postgres needs --table, the event table to read")
	}
	for _, name := range []string{"demo", "audit", "memory-limit"} {
		if fs.Changed(name) {
			return false, usagef("analyze: --%s does not apply to a PostgreSQL table (--postgres)", name)
		}
	}
	if fs.NArg() > 0 {
		return false, usagef("analyze: --postgres reads a table, not files (got %s)", strings.Join(fs.Args(), " "))
	}
	def, err := warehouseDefinition(run, w.table)
	if err != nil {
		return false, err
	}
	q, err := warehouse.Build(def)
	if err != nil {
		return false, usagef("analyze: %v", err)
	}
	run.postgres, run.query = w.postgres, q
	run.audit = ""
	var inputs []string
	if f.spec != "" {
		inputs = append(inputs, f.spec)
	}
	return true, checkOutputs(run, inputs)
}

// analyzePostgres runs the run's PostgreSQL query and analyses the
// tallies it returns. The session's time zone is UTC, so that a
// timestamp without time zone reads as UTC, as in files.
func analyzePostgres(ctx context.Context, run *analyzeRun) (*pipeline.Result, error) {
	text, err := run.query.SQL(warehouse.PostgreSQL)
	if err != nil {
		return nil, usagef("analyze: %v", err)
	}
	cfg, err := pgx.ParseConfig(run.postgres)
	if err != nil {
		return nil, usagef("analyze: --postgres: %v", err)
	}
	cfg.RuntimeParams["timezone"] = "UTC"
	conn, err := pgx.ConnectConfig(ctx, cfg)
	if err != nil {
		return nil, &dataError{fmt.Errorf("--postgres: %w", err)}
	}
	defer conn.Close(context.Background())
	rows, err := queryRows(ctx, conn, run.query, text)
	if sig := interrupted(ctx); err != nil && sig != nil {
		return nil, fmt.Errorf("analyze: interrupted by %w; the query was cancelled and no readout was written", sig)
	}
	if err != nil {
		return nil, &dataError{fmt.Errorf("--postgres: the query over %s: %w", run.query.Table(), err)}
	}
	tallies, in, err := run.query.Decode(rows)
	if err != nil {
		return nil, &dataError{err}
	}
	res := &pipeline.Result{}
	for i, e := range run.experiments {
		o := e.opts
		o.RowsRead, o.BadRows = in.RowsRead, in.BadRows
		r, err := experiment.Analyze(e.spec, tallies[i], o)
		if err != nil {
			return nil, &dataError{fmt.Errorf("experiment %q: %w", e.spec.Key, err)}
		}
		res.Readouts = append(res.Readouts, r)
	}
	return res, nil
}

// queryRows runs the query and scans its rows.
func queryRows(ctx context.Context, conn *pgx.Conn, q *warehouse.Query, text string) ([]*warehouse.Row, error) {
	rs, err := conn.Query(ctx, text)
	if err != nil {
		return nil, err
	}
	defer rs.Close()
	var rows []*warehouse.Row
	for rs.Next() {
		r := q.NewRow()
		if err := rs.Scan(r.Targets()...); err != nil {
			return nil, err
		}
		rows = append(rows, r)
	}
	return rows, rs.Err()
}

const sqlUsage = `Usage: armtally sql --table NAME [--dialect D] [flags]
       armtally sql --spec FILE --table NAME [--dialect D] [flags]

Writes the SQL query that computes, inside a database or cluster, what
analyze computes from files: per arm, segment value and metric the units,
conversions and immature units, and the diagnostics (bad rows, exposure
rows, multi-arm and tied units, ignored events by reason, the data's
freshness), with the same event semantics. The experiments, window,
policies, metrics, segments and column mapping come from the same flags
and spec file as analyze; several experiments of a spec are computed in
one query.

The result has the columns experiment, kind, name, arm, one per segment,
metric, units, conversions, immature, at_time; its rows of kind 'count'
are the counts table analyze reads (input.shape = "counts"). On
PostgreSQL, 'armtally analyze --postgres URL --table NAME' runs the query
and writes the readout, diagnostics included, in one step.

The ts column must be a timestamp; a timestamp without time zone is read
in the session's time zone, so run the query in a UTC session.

Dialects: duckdb, postgres, trino, spark, bigquery, snowflake.

Examples:
  armtally sql --table analytics.events --experiment checkout-flow-2026 --metric purchase=purchase:7d --dialect trino
  armtally sql --spec experiments.toml --table events --dialect bigquery --out counts.sql

Flags:
`

// runSQL runs the sql command.
func runSQL(args []string, stdout, stderr io.Writer) error {
	var f analyzeFlags
	fs := newAnalyzeFlagSet(&f, stderr)
	dialect := fs.String("dialect", "postgres", "SQL dialect: "+strings.Join(warehouse.Dialects(), ", "))
	if err := parseFlags(fs, args, sqlUsage, stdout); err != nil {
		return err
	}
	text, err := sqlQuery(fs, &f, *dialect)
	var fe *specfile.FlagError
	if errors.As(err, &fe) {
		return usagef("sql: %s", fe.Msg)
	}
	if err != nil {
		return err
	}
	if f.out == "" || f.out == "-" {
		_, err = io.WriteString(stdout, text)
		return err
	}
	return os.WriteFile(f.out, []byte(text), 0o644)
}

// sqlQuery parses the sql command line and renders its query.
func sqlQuery(fs *pflag.FlagSet, f *analyzeFlags, dialect string) (string, error) {
	d, err := warehouse.ParseDialect(dialect)
	if err != nil {
		return "", usagef("sql: --dialect: %v", err)
	}
	if f.warehouse.table == "" {
		return "", usagef("sql: --table NAME is required: the event table the query reads")
	}
	for _, name := range []string{"demo", "postgres", "json", "audit", "memory-limit", "spill-dir"} {
		if fs.Changed(name) {
			return "", usagef("sql: --%s does not apply: sql writes a query (--out names its file)", name)
		}
	}
	if fs.NArg() > 0 {
		return "", usagef("sql: the query reads --table, not files (got %s)", strings.Join(fs.Args(), " "))
	}
	f.exp.Given = fs.Changed
	sf, err := readSpec(f.spec, f.maxSpecSize)
	if err != nil {
		return "", err
	}
	run := &analyzeRun{shape: experiment.InputEventLog}
	if sf != nil {
		run.shape = sf.Shape
	}
	exps, err := analyzeExperiments(fs, f, sf)
	if err != nil {
		return "", err
	}
	for _, e := range exps {
		spec, opts, err := e.Build()
		if err != nil {
			return "", err
		}
		run.experiments = append(run.experiments, builtExperiment{spec: spec, opts: opts})
	}
	override := func(name string) bool { return sf == nil || fs.Changed(name) }
	if err := applyMapping(fs, f, sf, override, run); err != nil {
		return "", err
	}
	def, err := warehouseDefinition(run, f.warehouse.table)
	if err != nil {
		return "", err
	}
	q, err := warehouse.Build(def)
	if err != nil {
		return "", usagef("sql: %v", err)
	}
	text, err := q.SQL(d)
	if err != nil {
		return "", usagef("sql: %v", err)
	}
	return text + ";\n", nil
}
