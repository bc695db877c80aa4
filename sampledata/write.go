package sampledata

import (
	"encoding/csv"
	"fmt"
	"io"
	"math/rand/v2"

	"github.com/parquet-go/parquet-go"
)

// Column names of the written files, which are also armtally's default
// column mapping.
const (
	ColUserID     = "user_id"
	ColTS         = "ts"
	ColEvent      = "event"
	ColExperiment = "experiment"
	ColArm        = "arm"
	ColPlatform   = "platform"
)

// Columns returns the column names in file order.
func Columns() []string {
	return []string{ColUserID, ColTS, ColEvent, ColExperiment, ColArm, ColPlatform}
}

// parquetRow is the Parquet schema: string columns dictionary-encoded, ts as
// TIMESTAMP(MICROS, isAdjustedToUTC=true), experiment and arm optional, all
// columns zstd-compressed.
type parquetRow struct {
	UserID     string  `parquet:"user_id,dict,zstd"`
	TS         int64   `parquet:"ts,timestamp(microsecond:utc),delta,zstd"`
	Event      string  `parquet:"event,dict,zstd"`
	Experiment *string `parquet:"experiment,optional,dict,zstd"`
	Arm        *string `parquet:"arm,optional,dict,zstd"`
	Platform   string  `parquet:"platform,dict,zstd"`
}

// parquetBatch is the number of rows handed to the Parquet writer at once.
const parquetBatch = 1024

// WriteParquet generates the event log of cfg from src (as Generate does) and
// writes it to w as one Parquet file with the columns listed by Columns. The
// string columns are dictionary-encoded, ts is TIMESTAMP(MICROS) adjusted to
// UTC, experiment and arm are optional (null except on exposure rows), every
// column is zstd-compressed, and row groups hold cfg.RowGroupSize rows
// (DefaultRowGroupSize when 0; the last one fewer).
//
// The writer holds one row group in memory. The file metadata carries no
// time, host or build information, so the same cfg and seed give the same
// bytes. On error, w holds a partial file.
func WriteParquet(w io.Writer, cfg Config, src rand.Source) (Summary, error) {
	if err := Validate(cfg); err != nil {
		return Summary{}, err
	}
	groupRows := cfg.RowGroupSize
	if groupRows == 0 {
		groupRows = DefaultRowGroupSize
	}
	pw := parquet.NewGenericWriter[parquetRow](w,
		parquet.MaxRowsPerRowGroup(int64(groupRows)),
		parquet.CreatedBy("armtally-sampledata", "1", "none"),
	)
	// Pointers for the optional columns, one per arm, shared by all rows.
	experiment := cfg.Experiment
	armNames := make(map[string]*string, len(cfg.Arms))
	for _, a := range cfg.Arms {
		armNames[a.Name] = &a.Name
	}

	batch := make([]parquetRow, 0, parquetBatch)
	flush := func() error {
		if _, err := pw.Write(batch); err != nil {
			return err
		}
		clear(batch)
		batch = batch[:0]
		return nil
	}
	sum, err := generate(cfg, src, func(e Event) error {
		r := parquetRow{UserID: e.User, TS: e.TS.UnixMicro(), Event: e.Name, Platform: e.Platform}
		if e.Arm != "" {
			r.Experiment = &experiment
			r.Arm = armNames[e.Arm]
		}
		batch = append(batch, r)
		if len(batch) == cap(batch) {
			return flush()
		}
		return nil
	})
	if err != nil {
		return Summary{}, fmt.Errorf("write parquet: %w", err)
	}
	if err := flush(); err != nil {
		return Summary{}, fmt.Errorf("write parquet: %w", err)
	}
	if err := pw.Close(); err != nil {
		return Summary{}, fmt.Errorf("write parquet: close: %w", err)
	}
	return sum, nil
}

// csvTimeLayout is RFC 3339 in UTC with exactly six fractional digits.
const csvTimeLayout = "2006-01-02T15:04:05.000000Z07:00"

// WriteCSV generates the event log of cfg from src (as Generate does) and
// writes it to w as CSV: a header row with the names listed by Columns, then
// one record per row. ts is RFC 3339 in UTC with six fractional digits
// (2026-11-03T08:15:02.123456Z); a null experiment or arm is an empty field.
// On error, w holds a partial file.
func WriteCSV(w io.Writer, cfg Config, src rand.Source) (Summary, error) {
	if err := Validate(cfg); err != nil {
		return Summary{}, err
	}
	cw := csv.NewWriter(w)
	if err := cw.Write(Columns()); err != nil {
		return Summary{}, fmt.Errorf("write csv: header: %w", err)
	}
	rec := make([]string, len(Columns()))
	var ts []byte
	sum, err := generate(cfg, src, func(e Event) error {
		ts = e.TS.UTC().AppendFormat(ts[:0], csvTimeLayout)
		rec[0], rec[1], rec[2], rec[3], rec[4], rec[5] = e.User, string(ts), e.Name, e.Experiment, e.Arm, e.Platform
		return cw.Write(rec)
	})
	if err != nil {
		return Summary{}, fmt.Errorf("write csv: %w", err)
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return Summary{}, fmt.Errorf("write csv: %w", err)
	}
	return sum, nil
}
