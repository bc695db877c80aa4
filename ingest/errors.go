package ingest

import (
	"errors"
	"fmt"
	"strconv"
	"strings"

	"github.com/armtally/armtally/ingest/safetext"
)

// Reasons a row is bad. A *RowError returns one of these from Unwrap, so
// callers count bad rows by reason with errors.Is. The first eight are the
// event log's (each has a BadRowReason); the rest, with the timestamp
// reasons, are those of a unit table or a counts table (for a duplicate the
// *RowError returns an error that wraps ErrDuplicateCell).
var (
	ErrNullUser       = errors.New("null or empty user id")
	ErrNullTimestamp  = errors.New("null timestamp")
	ErrBadTimestamp   = errors.New("cannot parse timestamp")
	ErrTimestampRange = errors.New("timestamp out of range")
	ErrNullEvent      = errors.New("null or empty event name")
	ErrNoArm          = errors.New("exposure row without an arm")
	ErrFieldCount     = errors.New("wrong number of fields")
	ErrUnknownArm     = errors.New("exposure row with an arm that is not planned")

	ErrNullCell      = errors.New("null or empty value")
	ErrBadFlag       = errors.New("not a conversion flag (want 0/1, true/false or yes/no, in any case)")
	ErrBadCount      = errors.New("not a count (want a whole number, 0 or more)")
	ErrTooMany       = errors.New("more conversions than units")
	ErrUnknownMetric = errors.New("not a metric of the experiment")
	ErrDuplicateCell = errors.New("duplicate row: the same arm, segment values and metric as an earlier row")
)

// BadRowReason names why a row of an event log is bad, as Stats.BadRows
// and the readout's diagnostics spell it: a snake_case word. The names are
// stable; scripts may match on them.
type BadRowReason string

// String returns the reason's name.
func (r BadRowReason) String() string { return string(r) }

// The reasons of the row sentinels, in the order of Stats.BadRows.
const (
	ReasonNullUser           BadRowReason = "null_user"              // ErrNullUser
	ReasonNullTimestamp      BadRowReason = "null_timestamp"         // ErrNullTimestamp
	ReasonBadTimestamp       BadRowReason = "bad_timestamp"          // ErrBadTimestamp
	ReasonTimestampRange     BadRowReason = "timestamp_out_of_range" // ErrTimestampRange
	ReasonNullEvent          BadRowReason = "null_event"             // ErrNullEvent
	ReasonExposureWithoutArm BadRowReason = "exposure_without_arm"   // ErrNoArm
	ReasonWrongFieldCount    BadRowReason = "wrong_field_count"      // ErrFieldCount
	ReasonUnknownArm         BadRowReason = "unknown_arm"            // ErrUnknownArm
)

// BadRowCount is the number of bad rows of one reason.
type BadRowCount struct {
	Reason BadRowReason `json:"reason"`
	Count  int64        `json:"count"`
}

// numReasons is the number of event-log row sentinels.
const numReasons = 8

// reasonOf pairs each row sentinel with its reason, in the order of
// Stats.BadRows; reasonIndex numbers them by position here.
func reasonOf(i int) (BadRowReason, error) {
	switch i {
	case 0:
		return ReasonNullUser, ErrNullUser
	case 1:
		return ReasonNullTimestamp, ErrNullTimestamp
	case 2:
		return ReasonBadTimestamp, ErrBadTimestamp
	case 3:
		return ReasonTimestampRange, ErrTimestampRange
	case 4:
		return ReasonNullEvent, ErrNullEvent
	case 5:
		return ReasonExposureWithoutArm, ErrNoArm
	case 6:
		return ReasonWrongFieldCount, ErrFieldCount
	case 7:
		return ReasonUnknownArm, ErrUnknownArm
	}
	return "", nil
}

// reasonIndex returns the position of a row sentinel, or -1.
func reasonIndex(err error) int {
	for i := 0; i < numReasons; i++ {
		if _, s := reasonOf(i); s == err {
			return i
		}
	}
	return -1
}

// Reason returns the reason (ReasonNullUser, ...) of a bad-row error: an
// error for which errors.Is matches one of the event log's row sentinels,
// such as a *RowError. For any other error it returns "".
func Reason(err error) BadRowReason {
	for i := 0; i < numReasons; i++ {
		if r, s := reasonOf(i); errors.Is(err, s) {
			return r
		}
	}
	return ""
}

// Reasons a whole file cannot be read. A *ColumnError returns one of these
// from Unwrap; ErrCorrupt is wrapped by the errors about a Parquet file whose
// metadata contradicts itself or its pages.
var (
	// ErrCorrupt: a Parquet file claims something that is not so (a
	// footer longer than the file, a column chunk of another column or
	// type, a value count that does not match the rows, offsets outside
	// the file, page headers that do not decode or claim sizes their codec
	// cannot produce), or a page cannot be decoded (parquet-go's error is
	// wrapped too).
	ErrCorrupt = errors.New("corrupt parquet file")
	// ErrCodec: a Parquet column chunk is compressed with a codec that
	// cannot be decoded here (LZO), with another codec than the column's
	// chunk in the first row group, or with the deprecated LZ4 codec in
	// chunks that decompress to more than can be rewritten in memory.
	ErrCodec = errors.New("unsupported compression codec")
	// ErrMissingColumn: a mapped column is not in the file.
	ErrMissingColumn = errors.New("missing column")
	// ErrColumnType: a mapped column has a type that cannot be read as its
	// logical column (for example an integer timestamp without an epoch unit,
	// or a repeated column).
	ErrColumnType = errors.New("unsupported column type")
)

// timestampForms names the accepted text forms in error messages.
const timestampForms = "RFC 3339 or YYYY-MM-DD[ HH:MM:SS[.frac]]"

// maxQuoted is the most bytes of escaped text a message shows of one value
// or name from the data; maxListed the most names it lists.
const (
	maxQuoted = 64
	maxListed = 100
)

// quote writes a value or name from the data in a message: in double
// quotes, control characters, bidi controls and bytes that are not UTF-8
// as visible escapes (safetext.Visible, as in the Markdown readout), and
// cut after maxQuoted bytes with "... (N bytes)".
func quote(s string) string {
	return `"` + safetext.Short(s, maxQuoted) + `"`
}

// nameList lists column names for a message: each escaped and cut as
// quote does (without the quotes), at most maxListed of them.
func nameList(names []string) string {
	shown := make([]string, 0, min(len(names), maxListed))
	for _, n := range names[:min(len(names), maxListed)] {
		shown = append(shown, safetext.Short(n, maxQuoted))
	}
	list := strings.Join(shown, ", ")
	if more := len(names) - len(shown); more > 0 {
		list += fmt.Sprintf(" and %d more", more)
	}
	return list
}

// RowError reports a bad row: where it is, which column, the raw value and
// the reason. The column name and the value are printed by quote: escaped
// and cut to 64 bytes. It prints as
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
		fmt.Fprintf(&b, "column %s: ", quote(e.Column))
	}
	switch e.Err {
	case ErrBadTimestamp:
		fmt.Fprintf(&b, "cannot parse %s as a timestamp (want %s", quote(e.Value), timestampForms)
		if _, err := strconv.ParseInt(e.Value, 10, 64); err == nil {
			b.WriteString(", or set the epoch unit for integer timestamps")
		}
		b.WriteString(")")
	case ErrTimestampRange:
		fmt.Fprintf(&b, "timestamp %s is outside the range of nanosecond timestamps (1677-09-21 to 2262-04-11)", quote(e.Value))
	case ErrFieldCount:
		fmt.Fprintf(&b, "wrong number of fields: got %s, the header has %d", e.Value, e.wantFields)
	default:
		b.WriteString(e.Err.Error())
		if e.Value != "" {
			fmt.Fprintf(&b, " (value %s)", quote(e.Value))
		}
	}
	return b.String()
}

// Unwrap returns the reason.
func (e *RowError) Unwrap() error { return e.Err }

// Reason returns the reason, such as ReasonNullUser; "" for a reason of a
// unit table or a counts table.
func (e *RowError) Reason() BadRowReason {
	r, _ := reasonOf(reasonIndex(e.Err))
	return r
}

// ErrBudgetExceeded is returned (inside a *BudgetError) when the bad rows
// exceed the error budget of Options.MaxBadRows or Options.MaxBadShare.
var ErrBudgetExceeded = errors.New("bad-row budget exceeded")

// BudgetError reports bad rows beyond the error budget. It prints as
//
//	bad-row budget exceeded: 101 bad rows, more than the 100 allowed (max bad rows); last bad row: events.csv:1042: column "ts": ...
//	bad-row budget exceeded: 3 bad rows of 10 read (30%), more than the 10% allowed (max bad share); last bad row: ...
//
// errors.Is matches ErrBudgetExceeded and the last bad row's reason;
// errors.As finds Last.
type BudgetError struct {
	// MaxBadRows is the count limit that was exceeded, or 0 when the
	// share limit was.
	MaxBadRows int64
	// MaxBadShare is the share limit that was exceeded, or 0.
	MaxBadShare float64
	// BadRows is the number of bad rows so far, RowsRead the number of
	// rows read, good or bad.
	BadRows, RowsRead int64
	// Last is the last bad row.
	Last *RowError
}

func (e *BudgetError) Error() string {
	var b strings.Builder
	b.WriteString(ErrBudgetExceeded.Error())
	if e.MaxBadShare > 0 {
		fmt.Fprintf(&b, ": %d bad rows of %d read (%s), more than the %s allowed (max bad share)",
			e.BadRows, e.RowsRead, percent(float64(e.BadRows)/float64(e.RowsRead)), percent(e.MaxBadShare))
	} else {
		fmt.Fprintf(&b, ": %d bad rows, more than the %d allowed (max bad rows)", e.BadRows, e.MaxBadRows)
	}
	if e.Last != nil {
		b.WriteString("; last bad row: ")
		b.WriteString(e.Last.Error())
	}
	return b.String()
}

// percent writes a share as a percentage with up to 4 significant digits.
func percent(x float64) string { return strconv.FormatFloat(100*x, 'g', 4, 64) + "%" }

// Unwrap returns ErrBudgetExceeded and the last bad row.
func (e *BudgetError) Unwrap() []error {
	if e.Last == nil {
		return []error{ErrBudgetExceeded}
	}
	return []error{ErrBudgetExceeded, e.Last}
}

// ColumnError reports a mapped column that a file lacks or that has a type
// the reader cannot use. The column name is printed by quote (escaped, cut
// to 64 bytes) and the detail with its control characters escaped. It
// prints as
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
	s := fmt.Sprintf("%s: column %s: %v", e.File, quote(e.Column), e.Err)
	if e.Detail != "" {
		s += " (" + safetext.Visible(e.Detail) + ")"
	}
	return s
}

// Unwrap returns the reason.
func (e *ColumnError) Unwrap() error { return e.Err }

// missingColumn reports a mapped column that is neither a column of the file
// nor one of its partition keys. The names are listed by nameList: a
// header of binary bytes gives a short, printable message.
func missingColumn(file, column string, available, partitions []string) *ColumnError {
	d := "the file has: " + nameList(available)
	if len(partitions) > 0 {
		d += "; partition keys: " + nameList(partitions)
	}
	return &ColumnError{File: file, Column: column, Err: ErrMissingColumn, Detail: d}
}
