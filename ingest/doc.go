// Package ingest reads experiment event logs from CSV and Parquet files into
// Arrow record batches of the logical event table defined in package
// experiment (user, ts, event, optional experiment and arm, and segment
// columns).
//
// The stages, per source, in order:
//
//  1. FileSources or BytesSource name the inputs; the extension (.csv,
//     .parquet, .parq) decides the format.
//  2. A Mapping names the physical column behind each logical column. A
//     missing or unusable column stops the reader with a *ColumnError
//     (ErrMissingColumn, ErrColumnType) before any row is read.
//  3. Each row is decoded: CSV cells with encoding/csv, Parquet values page
//     by page with parquet-go (only the mapped columns). Timestamps of every
//     form become int64 nanoseconds UTC, range checked (ParseTimestamp for
//     text).
//  4. One function decides whether a row is valid and, if not, its reason:
//     ErrNullUser, ErrNullTimestamp, ErrBadTimestamp, ErrTimestampRange,
//     ErrNullEvent, ErrNoArm (and ErrFieldCount for a CSV record of the wrong
//     width). In this version the first bad row stops the reader with a
//     *RowError naming file, line or row, column and value.
//  5. Valid rows are appended to Arrow builders and handed out as record
//     batches of at most Options.BatchSize rows, one source per batch.
//
// Ownership: a batch returned by Reader.Record is valid until the next call
// to Next or Close; the Reader releases it. Stats counts files, rows read
// and rows delivered.
//
// Not checked: that text is valid UTF-8, and anything about the meaning of
// the rows (duplicates, order, exposure rules), which belongs to package
// experiment.
package ingest
