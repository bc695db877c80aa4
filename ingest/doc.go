// Package ingest reads experiment event logs from CSV and Parquet files into
// Arrow record batches of the logical event table defined in package
// experiment (user, ts, event, optional experiment and arm, and segment
// columns).
//
// The stages, per source, in order:
//
//  1. FileSources, FSSources (the same inside an fs.FS) or BytesSource
//     name the inputs: files, folders (walked recursively) and patterns;
//     the end of a name (.csv, .csv.gz, .parquet, .parq) decides the
//     format. Hive-style folders (dt=2026-11-30/country=br/) below a named
//     folder or pattern root become each source's Partitions. Names
//     starting with '.' or '_' below a root are skipped. Source.Open gives
//     a caller the bytes of a source, OpenCSV a CSV source's header and
//     records.
//  2. A Mapping names the physical column behind each logical column; a
//     name that is not a file column but is a partition key takes the
//     partition's value on every row (a file column of the same name
//     wins). A missing or unusable column stops the reader with a
//     *ColumnError (ErrMissingColumn, ErrColumnType) before any row is
//     read. For Parquet, mapped column chunks in the deprecated LZ4 codec
//     (Hadoop's framing or a bare LZ4 block), which parquet-go cannot
//     decode, are first rewritten uncompressed in memory; each mapped
//     column chunk's metadata is checked against the schema and the row
//     group (ErrCorrupt, ErrCodec).
//  3. Each row is decoded: CSV cells with encoding/csv (OpenCSV: gzip when
//     the data starts with its magic bytes, whatever the name; a BOM;
//     Options.Delimiter), Parquet values page by page with parquet-go
//     (only the mapped columns). Timestamps of every form become int64
//     nanoseconds UTC, range checked (ParseTimestamp for text; one decoder
//     of Parquet timestamp types for every Parquet path).
//  4. One function decides whether a row is valid and, if not, its reason:
//     ErrNullUser, ErrNullTimestamp, ErrBadTimestamp, ErrTimestampRange,
//     ErrNullEvent, ErrNoArm, ErrUnknownArm (with Options.PlannedArms), and
//     ErrFieldCount for a CSV record of the
//     wrong width. Every bad row is counted by reason (Stats.BadRows, with
//     the first example of each). Without an error budget the first bad row
//     stops the reader with a *RowError naming file, line or row, column
//     and value; with one (Options.MaxBadRows, MaxBadShare) bad rows are
//     skipped until the budget is exceeded, which stops the reader with a
//     *BudgetError.
//  5. Valid rows are appended to Arrow builders and handed out as record
//     batches of at most Options.BatchSize rows, one source per batch.
//
// Reader, TableReader and SpillReader are Arrow array.RecordReaders.
// Ownership: a batch returned by RecordBatch is valid until the next call
// to Next or Close; the reader releases it (Retain it to keep it). The
// last Release of a reader closes it. Stats counts files, rows read, rows
// delivered and bad rows by reason (BadRowReason); the slices it returns
// are the caller's.
//
// Not checked: that text is valid UTF-8; that a file is listed only once;
// that a partition value agrees with a file column of the same name; and
// anything about the meaning of the rows (duplicates, order, exposure
// rules), which belongs to package experiment. A malformed CSV file (bare
// or unclosed quote) and a corrupt Parquet file are not bad rows: they
// always stop the reader.
package ingest
