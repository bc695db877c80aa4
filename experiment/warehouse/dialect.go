package warehouse

import (
	"fmt"
	"strconv"
	"strings"
	"time"
	"unicode/utf8"
)

// Dialect is a SQL engine the query is rendered for.
type Dialect int

// The dialects. Each renders the same query model; only the lexical forms
// (quoting, literals), the type names and the timestamp arithmetic differ,
// as each engine's documentation gives them (see the comments of each
// method below and the golden files under testdata/).
const (
	DuckDB Dialect = iota
	PostgreSQL
	Trino
	SparkSQL
	BigQuery
	Snowflake
)

var dialectNames = []string{"duckdb", "postgres", "trino", "spark", "bigquery", "snowflake"}

// Dialects returns the names ParseDialect takes, in a fixed order.
func Dialects() []string { return append([]string(nil), dialectNames...) }

// ParseDialect returns the dialect of a name: duckdb, postgres, trino,
// spark, bigquery or snowflake.
func ParseDialect(s string) (Dialect, error) {
	for i, n := range dialectNames {
		if s == n {
			return Dialect(i), nil
		}
	}
	return 0, fmt.Errorf("unknown SQL dialect %q (want %s)", s, strings.Join(dialectNames, ", "))
}

// String returns the dialect's name as ParseDialect takes it.
func (d Dialect) String() string {
	if d >= 0 && int(d) < len(dialectNames) {
		return dialectNames[d]
	}
	return fmt.Sprintf("Dialect(%d)", int(d))
}

// checkText refuses text no dialect can carry in a literal or an
// identifier: invalid UTF-8 and NUL.
func checkText(what, s string) error {
	if !utf8.ValidString(s) {
		return fmt.Errorf("%s %q is not valid UTF-8", what, s)
	}
	if strings.ContainsRune(s, 0) {
		return fmt.Errorf("%s %q holds a NUL character", what, s)
	}
	return nil
}

// ident quotes one identifier (a column or one part of a table name).
//
//   - DuckDB, PostgreSQL, Trino, Snowflake: double quotes, a double quote
//     doubled (SQL standard delimited identifiers; PostgreSQL "Lexical
//     Structure" 4.1.1, DuckDB "Keywords and Identifiers", Trino "Identifiers",
//     Snowflake "Identifier requirements").
//   - Spark SQL: backticks, a backtick doubled (Spark "Identifiers").
//   - BigQuery: backticks, with the escape sequences of string literals
//     (GoogleSQL "Lexical structure and syntax", quoted identifiers).
func (d Dialect) ident(s string) string {
	switch d {
	case SparkSQL:
		return "`" + strings.ReplaceAll(s, "`", "``") + "`"
	case BigQuery:
		return "`" + backslashEscape(s, '`') + "`"
	}
	return `"` + strings.ReplaceAll(s, `"`, `""`) + `"`
}

// str renders a string literal.
//
//   - DuckDB, Trino: 'text' with a quote doubled; a backslash is an
//     ordinary character (DuckDB "Literal Types", Trino "Literals").
//   - PostgreSQL: an escape string E'text' with backslashes and quotes
//     escaped, which reads the same whatever standard_conforming_strings
//     is (PostgreSQL "Lexical Structure" 4.1.2.2).
//   - Spark SQL, BigQuery, Snowflake: backslash escapes (\\, \', \uXXXX
//     for control characters; Spark "Literals", GoogleSQL "Lexical
//     structure and syntax", Snowflake "Escape sequences in single-quoted
//     string constants"). BigQuery's quoted strings may not hold a
//     newline, hence the escapes.
func (d Dialect) str(s string) string {
	switch d {
	case PostgreSQL:
		return "E'" + strings.NewReplacer(`\`, `\\`, `'`, `''`).Replace(s) + "'"
	case SparkSQL, BigQuery, Snowflake:
		return "'" + backslashEscape(s, '\'') + "'"
	}
	return "'" + strings.ReplaceAll(s, "'", "''") + "'"
}

// backslashEscape escapes a backslash, the quote character and every
// control character for the dialects whose literals take backslash
// escapes.
func backslashEscape(s string, quote rune) string {
	var b strings.Builder
	for _, r := range s {
		switch {
		case r == '\\' || r == quote:
			b.WriteByte('\\')
			b.WriteRune(r)
		case r < 0x20 || r == 0x7f:
			fmt.Fprintf(&b, `\u%04x`, r)
		default:
			b.WriteRune(r)
		}
	}
	return b.String()
}

// stringType and intType are the names of the text and 64-bit integer
// types in CAST.
func (d Dialect) stringType() string {
	switch d {
	case PostgreSQL:
		return "TEXT"
	case SparkSQL, BigQuery:
		return "STRING"
	}
	return "VARCHAR"
}

func (d Dialect) intType() string {
	if d == BigQuery {
		return "INT64"
	}
	return "BIGINT"
}

// timestamp renders an instant, to the microsecond, as a literal of the
// engine's timestamp-with-time-zone type, so that it means the same
// instant whatever the session's time zone.
//
//   - DuckDB: TIMESTAMPTZ '... +00' ("Timestamp with Time Zone").
//   - PostgreSQL: TIMESTAMPTZ '...+00' ("Date/Time Types" 8.5.1.3).
//   - Trino: TIMESTAMP '... UTC', a timestamp with time zone literal
//     ("Date and time functions and operators").
//   - Spark SQL: TIMESTAMP '...Z' ("Literals", datetime literal zone_id).
//   - BigQuery: TIMESTAMP '...+00' ("Timestamp type", canonical format).
//   - Snowflake: TO_TIMESTAMP_TZ with an explicit format ("TO_TIMESTAMP").
func (d Dialect) timestamp(t time.Time) string {
	s := t.UTC().Format("2006-01-02 15:04:05.000000")
	switch d {
	case DuckDB:
		return "TIMESTAMPTZ '" + s + "+00'"
	case PostgreSQL:
		return "TIMESTAMPTZ '" + s + "+00'"
	case Trino:
		return "TIMESTAMP '" + s + " UTC'"
	case SparkSQL:
		return "TIMESTAMP '" + s + "Z'"
	case BigQuery:
		return "TIMESTAMP '" + s + "+00'"
	}
	return "TO_TIMESTAMP_TZ('" + s + " +00:00', 'YYYY-MM-DD HH24:MI:SS.FF6 TZH:TZM')"
}

// addDuration renders x + w for a timestamp expression x and a window w
// of whole microseconds (whole milliseconds for Trino), in fixed units
// only (seconds or smaller), so that no calendar or time zone rule
// applies.
//
//   - DuckDB, PostgreSQL: x + INTERVAL 'N seconds' (or microseconds).
//   - Trino: date_add('second', N, x) (or millisecond).
//   - Spark SQL: x + INTERVAL 'S.ffffff' SECOND (an ANSI day-time
//     interval literal).
//   - BigQuery: TIMESTAMP_ADD(x, INTERVAL N SECOND) (or MICROSECOND).
//   - Snowflake: DATEADD(second, N, x) (or microsecond).
func (d Dialect) addDuration(x string, w time.Duration) (string, error) {
	if w%time.Microsecond != 0 {
		return "", fmt.Errorf("attribution window %v is not a whole number of microseconds, the finest unit the engines share", w)
	}
	whole := w%time.Second == 0
	secs := strconv.FormatInt(int64(w/time.Second), 10)
	micros := strconv.FormatInt(int64(w/time.Microsecond), 10)
	switch d {
	case DuckDB, PostgreSQL:
		if whole {
			return "(" + x + " + INTERVAL '" + secs + " seconds')", nil
		}
		return "(" + x + " + INTERVAL '" + micros + " microseconds')", nil
	case Trino:
		if whole {
			return "date_add('second', " + secs + ", " + x + ")", nil
		}
		if w%time.Millisecond != 0 {
			return "", fmt.Errorf("attribution window %v is not a whole number of milliseconds, the finest unit of Trino's date_add", w)
		}
		return "date_add('millisecond', " + strconv.FormatInt(int64(w/time.Millisecond), 10) + ", " + x + ")", nil
	case SparkSQL:
		frac := fmt.Sprintf("%d.%06d", int64(w/time.Second), int64(w%time.Second/time.Microsecond))
		return "(" + x + " + INTERVAL '" + frac + "' SECOND)", nil
	case BigQuery:
		if whole {
			return "TIMESTAMP_ADD(" + x + ", INTERVAL " + secs + " SECOND)", nil
		}
		return "TIMESTAMP_ADD(" + x + ", INTERVAL " + micros + " MICROSECOND)", nil
	}
	if whole {
		return "DATEADD(second, " + secs + ", " + x + ")", nil
	}
	return "DATEADD(microsecond, " + micros + ", " + x + ")", nil
}

// bytewise renders x so that MIN and comparisons order it by its bytes:
// PostgreSQL's default collation may follow the locale, hence COLLATE
// "C"; the other engines compare text by bytes (or code points, the same
// order for UTF-8) unless a collation is asked for.
func (d Dialect) bytewise(x string) string {
	if d == PostgreSQL {
		return x + ` COLLATE "C"`
	}
	return x
}

// materialized is the keyword of a CTE's materialization where the engine
// lets the query choose (PostgreSQL 12 and later: "WITH Queries" 7.8.3;
// DuckDB: "WITH Clause", CTE materialization); elsewhere the engine
// decides, and a CTE read twice may be computed twice.
func (d Dialect) materialized(m materialize) string {
	if d != PostgreSQL && d != DuckDB {
		return ""
	}
	switch m {
	case matOnce:
		return "MATERIALIZED "
	case matInline:
		return "NOT MATERIALIZED "
	}
	return ""
}
