package ingest

import (
	"errors"
	"fmt"
	"strconv"
	"strings"
)

// Reasons a row is bad. A *RowError returns one of these from Unwrap, so
// callers count bad rows by reason with errors.Is.
var (
	ErrNullUser       = errors.New("null or empty user id")
	ErrNullTimestamp  = errors.New("null timestamp")
	ErrBadTimestamp   = errors.New("cannot parse timestamp")
	ErrTimestampRange = errors.New("timestamp out of range")
	ErrNullEvent      = errors.New("null or empty event name")
	ErrNoArm          = errors.New("exposure row without an arm")
	ErrFieldCount     = errors.New("wrong number of fields")
)

// Reasons a whole file cannot be read. A *ColumnError returns one of these
// from Unwrap.
var (
	// ErrMissingColumn: a mapped column is not in the file.
	ErrMissingColumn = errors.New("missing column")
	// ErrColumnType: a mapped column has a type that cannot be read as its
	// logical column (for example an integer timestamp without an epoch unit,
	// or a repeated column).
	ErrColumnType = errors.New("unsupported column type")
)

// timestampForms names the accepted text forms in error messages.
const timestampForms = "RFC 3339 or YYYY-MM-DD[ HH:MM:SS[.frac]]"

// RowError reports a bad row: where it is, which column, the raw value and
// the reason. It prints as
//
//	events.csv:1042: column "ts": cannot parse "2026-13-01" as a timestamp (want RFC 3339 or YYYY-MM-DD[ HH:MM:SS[.frac]])
//	events.parquet:3146770: row group 3: column "user": null or empty user id
type RowError struct {
	File string
	// Row is the physical line for CSV (the header is line 1; a quoted field
	// may span lines, so this is not the record number) and the 1-based row
	// in the file for Parquet.
	Row int64
	// RowGroup is the Parquet row group (0-based), -1 for CSV.
	RowGroup int
	// Column is the physical column name; empty when the error concerns the
	// whole row (ErrFieldCount).
	Column string
	// Value is the raw value as text ("" for a null). For ErrFieldCount it
	// is the number of fields found.
	Value string
	// Err is the reason, one of the Err* sentinels of this package.
	Err error

	wantFields int // for ErrFieldCount: fields in the header
}

func (e *RowError) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%s:%d: ", e.File, e.Row)
	if e.RowGroup >= 0 {
		fmt.Fprintf(&b, "row group %d: ", e.RowGroup)
	}
	if e.Column != "" {
		fmt.Fprintf(&b, "column %q: ", e.Column)
	}
	switch e.Err {
	case ErrBadTimestamp:
		fmt.Fprintf(&b, "cannot parse %q as a timestamp (want %s", e.Value, timestampForms)
		if _, err := strconv.ParseInt(e.Value, 10, 64); err == nil {
			b.WriteString(", or set the epoch unit for integer timestamps")
		}
		b.WriteString(")")
	case ErrTimestampRange:
		fmt.Fprintf(&b, "timestamp %q is outside the range of nanosecond timestamps (1677-09-21 to 2262-04-11)", e.Value)
	case ErrFieldCount:
		fmt.Fprintf(&b, "wrong number of fields: got %s, the header has %d", e.Value, e.wantFields)
	default:
		b.WriteString(e.Err.Error())
		if e.Value != "" {
			fmt.Fprintf(&b, " (value %q)", e.Value)
		}
	}
	return b.String()
}

// Unwrap returns the reason.
func (e *RowError) Unwrap() error { return e.Err }

// ColumnError reports a mapped column that a file lacks or that has a type
// the reader cannot use. It prints as
//
//	events.csv: column "user_id": missing column (the file has: uid, ts, event)
type ColumnError struct {
	File   string
	Column string // physical name
	// Detail says what is wrong beyond the reason, for example the
	// columns the file does have.
	Detail string
	Err    error // ErrMissingColumn or ErrColumnType
}

func (e *ColumnError) Error() string {
	s := fmt.Sprintf("%s: column %q: %v", e.File, e.Column, e.Err)
	if e.Detail != "" {
		s += " (" + e.Detail + ")"
	}
	return s
}

// Unwrap returns the reason.
func (e *ColumnError) Unwrap() error { return e.Err }

func missingColumn(file, column string, available []string) *ColumnError {
	return &ColumnError{File: file, Column: column, Err: ErrMissingColumn,
		Detail: "the file has: " + strings.Join(available, ", ")}
}
