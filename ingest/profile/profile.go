// Package profile describes what an event log holds before a full run: for
// each file its format, columns and types, row count (Parquet: from the
// file's metadata; CSV: counted) and which column would be read as each
// logical column under a Mapping; over all files, the experiments and arms
// seen on exposure rows, the event names by rows, the time range of the
// valid rows and the bad rows by reason. Files are opened with
// ingest.Source.Open and ingest.OpenCSV and read with ingest.Reader, so the
// profile sees the rows exactly as an analysis would.
//
// The text form is report.WriteProfile's; the JSON form is Report encoded
// with encoding/json.
package profile

import (
	"errors"
	"fmt"
	"io"
	"sort"
	"time"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/parquet-go/parquet-go"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/ingest"
)

// Report is the profile of a set of sources; the JSON output has this
// layout.
type Report struct {
	Files []File `json:"files"`
	// RowsRead is the number of rows read from the files whose mapped
	// columns are all there; ValidRows of them were valid.
	RowsRead  int64 `json:"rows_read"`
	ValidRows int64 `json:"valid_rows"`
	// BadRows counts the bad rows by reason, in the order the reasons were
	// first seen; BadRowExamples gives the first of each reason.
	BadRows        []ingest.BadRowCount `json:"bad_rows"`
	BadRowExamples []string             `json:"bad_row_examples"`
	// ExposureEvent is the event name of exposure rows.
	ExposureEvent string          `json:"exposure_event"`
	Exposures     []ExposureCount `json:"exposures"`
	// Events counts rows by event name, most frequent first (then by
	// name); EventsShown of them are shown in the text.
	Events      []EventCount `json:"events"`
	EventsShown int          `json:"events_shown"`
	// First and Last are the earliest and latest ts of the valid rows;
	// nil when there are none.
	First *time.Time `json:"first_ts"`
	Last  *time.Time `json:"last_ts"`
}

// File describes one file.
type File struct {
	Name string `json:"name"`
	// Format is "Parquet", "CSV" or "CSV (gzip)".
	Format string `json:"format"`
	// Rows is the number of rows: from the metadata for Parquet, counted
	// for CSV; RowsFrom says which ("metadata" or "counted").
	Rows     int64    `json:"rows"`
	RowsFrom string   `json:"rows_from"`
	Columns  []Column `json:"columns"`
	// Partitions are the key=value folder names on the file's path.
	Partitions []ingest.Partition `json:"partitions"`
	Mapping    []ColumnMapping    `json:"mapping"`
	// Error says why the file's rows were not read, or "".
	Error string `json:"error,omitempty"`
}

// Column is one physical column: its name (a dotted path inside a Parquet
// group) and its type ("text" for CSV; repetition, physical and logical
// type for Parquet).
type Column struct {
	Name string `json:"name"`
	Type string `json:"type"`
}

// The statuses of a ColumnMapping.
const (
	StatusColumn    = "column"     // a column of the file
	StatusPartition = "partition"  // a key=value folder name
	StatusMissing   = "missing"    // neither
	StatusNotMapped = "not mapped" // the mapping names no column
)

// ColumnMapping says which physical column a logical column is read from.
type ColumnMapping struct {
	Logical  string `json:"logical"`
	Physical string `json:"physical"`
	// Status is StatusColumn, StatusPartition, StatusMissing or
	// StatusNotMapped.
	Status string `json:"status"`
}

// ExposureCount counts exposure rows of one experiment and arm.
type ExposureCount struct {
	Experiment string `json:"experiment"`
	Arm        string `json:"arm"`
	Rows       int64  `json:"rows"`
}

// EventCount counts rows of one event name.
type EventCount struct {
	Event string `json:"event"`
	Rows  int64  `json:"rows"`
}

// NoValue stands for a null or missing experiment or arm.
const NoValue = "(none)"

// OptionsError reports options that ingest.NewReader refuses; every other
// error of Build is about the data.
type OptionsError struct{ Err error }

func (e *OptionsError) Error() string { return e.Err.Error() }

// Unwrap returns the reader's error.
func (e *OptionsError) Unwrap() error { return e.Err }

// Build reads each source's metadata and rows and returns the profile;
// top is the number of event names the text shows. opts should have a
// bad-row budget with no limit (MaxBadRows: ingest.NoLimit), so that bad
// rows are counted rather than fatal. A file that lacks a mapped column is
// described, its rows counted (CSV) but not read, and File.Error says why;
// any other error stops Build.
func Build(sources []ingest.Source, opts ingest.Options, top int) (*Report, error) {
	b := &builder{rep: &Report{ExposureEvent: opts.ExposureEvent, Exposures: []ExposureCount{}, Events: []EventCount{},
		BadRows: []ingest.BadRowCount{}, BadRowExamples: []string{}},
		exposures: map[[2]string]int64{}, events: map[string]int64{}, bad: map[ingest.BadRowReason]int64{}}
	for _, src := range sources {
		if err := b.add(src, opts); err != nil {
			return nil, err
		}
	}
	return b.finish(top), nil
}

// builder gathers the counts of Build.
type builder struct {
	rep         *Report
	exposures   map[[2]string]int64
	events      map[string]int64
	bad         map[ingest.BadRowReason]int64
	badOrder    []ingest.BadRowReason
	first, last int64
	hasTS       bool
}

// add describes one source and reads its rows.
func (b *builder) add(src ingest.Source, opts ingest.Options) error {
	fr, err := describe(src, opts)
	if err != nil {
		return err
	}
	r, err := ingest.NewReader([]ingest.Source{src}, opts)
	if err != nil {
		return &OptionsError{err}
	}
	for r.Next() {
		b.count(r.RecordBatch(), opts.ExposureEvent)
	}
	st := r.Stats()
	rerr := r.Err()
	r.Close()
	var ce *ingest.ColumnError
	switch {
	case rerr == nil:
	case errors.As(rerr, &ce):
		fr.Error = rerr.Error()
	default:
		return rerr
	}
	if src.Format() == ingest.FormatCSV {
		if rerr == nil {
			fr.Rows, fr.RowsFrom = st.RowsRead, "counted"
		} else if fr.Rows, err = countCSVRows(src, opts.Delimiter); err != nil {
			return err
		}
	}
	b.rep.RowsRead += st.RowsRead
	b.rep.ValidRows += st.Rows
	for i, c := range st.BadRows {
		if _, seen := b.bad[c.Reason]; !seen {
			b.badOrder = append(b.badOrder, c.Reason)
			if i < len(st.BadRowExamples) && st.BadRowExamples[i] != nil {
				b.rep.BadRowExamples = append(b.rep.BadRowExamples, st.BadRowExamples[i].Error())
			}
		}
		b.bad[c.Reason] += c.Count
	}
	b.rep.Files = append(b.rep.Files, fr)
	return nil
}

// count adds the rows of one batch of the logical event table.
func (b *builder) count(rec arrow.RecordBatch, exposure string) {
	ev := column(rec, experiment.ColEvent)
	ex := column(rec, experiment.ColExperiment)
	arm := column(rec, experiment.ColArm)
	ts := rec.Column(rec.Schema().FieldIndices(experiment.ColTS)[0]).(*array.Timestamp).TimestampValues()
	for i := 0; i < int(rec.NumRows()); i++ {
		name := ev.Value(i)
		b.events[name]++
		if name == exposure {
			b.exposures[[2]string{value(ex, i), value(arm, i)}]++
		}
		t := int64(ts[i])
		if !b.hasTS || t < b.first {
			b.first = t
		}
		if !b.hasTS || t > b.last {
			b.last = t
		}
		b.hasTS = true
	}
}

// finish sorts the counts into the report.
func (b *builder) finish(top int) *Report {
	rep := b.rep
	for _, reason := range b.badOrder {
		rep.BadRows = append(rep.BadRows, ingest.BadRowCount{Reason: reason, Count: b.bad[reason]})
	}
	for k, n := range b.exposures {
		rep.Exposures = append(rep.Exposures, ExposureCount{Experiment: k[0], Arm: k[1], Rows: n})
	}
	sort.Slice(rep.Exposures, func(i, j int) bool {
		a, c := rep.Exposures[i], rep.Exposures[j]
		if a.Experiment != c.Experiment {
			return a.Experiment < c.Experiment
		}
		return a.Arm < c.Arm
	})
	for name, n := range b.events {
		rep.Events = append(rep.Events, EventCount{Event: name, Rows: n})
	}
	sort.Slice(rep.Events, func(i, j int) bool {
		a, c := rep.Events[i], rep.Events[j]
		if a.Rows != c.Rows {
			return a.Rows > c.Rows
		}
		return a.Event < c.Event
	})
	rep.EventsShown = max(0, min(top, len(rep.Events)))
	if b.hasTS {
		f, l := time.Unix(0, b.first).UTC(), time.Unix(0, b.last).UTC()
		rep.First, rep.Last = &f, &l
	}
	return rep
}

// column returns the named utf8 column of rec, or nil.
func column(rec arrow.RecordBatch, name string) *array.String {
	idx := rec.Schema().FieldIndices(name)
	if len(idx) == 0 {
		return nil
	}
	c, _ := rec.Column(idx[0]).(*array.String)
	return c
}

// value returns row i of c, or NoValue for a null or a missing column.
func value(c *array.String, i int) string {
	if c == nil || c.IsNull(i) {
		return NoValue
	}
	return c.Value(i)
}

// describe returns a file's format, columns, row count (Parquet) and
// mapping.
func describe(src ingest.Source, opts ingest.Options) (File, error) {
	fr := File{Name: src.Name, Partitions: src.Partitions, Columns: []Column{}}
	if fr.Partitions == nil {
		fr.Partitions = []ingest.Partition{}
	}
	switch src.Format() {
	case ingest.FormatParquet:
		fr.Format = "Parquet"
		if err := parquetSchema(&fr, src); err != nil {
			return fr, err
		}
	case ingest.FormatCSV:
		f, err := ingest.OpenCSV(src, opts.Delimiter)
		if err != nil {
			return fr, err
		}
		fr.Format = "CSV"
		if f.Gzipped() {
			fr.Format = "CSV (gzip)"
		}
		for _, h := range f.Header() {
			fr.Columns = append(fr.Columns, Column{Name: h, Type: "text"})
		}
		f.Close()
	default:
		return fr, fmt.Errorf("%s: unknown file type", src.Name)
	}
	fr.Mapping = mapping(fr.Columns, src.Partitions, opts.Mapping)
	return fr, nil
}

// mapping says where each logical column of m comes from.
func mapping(cols []Column, parts []ingest.Partition, m ingest.Mapping) []ColumnMapping {
	has := map[string]bool{}
	for _, c := range cols {
		has[c.Name] = true
	}
	part := map[string]bool{}
	for _, p := range parts {
		part[p.Key] = true
	}
	var out []ColumnMapping
	for _, lc := range []struct{ logical, physical string }{
		{experiment.ColUser, m.User}, {experiment.ColTS, m.TS}, {experiment.ColEvent, m.Event},
		{experiment.ColExperiment, m.Experiment}, {experiment.ColArm, m.Arm},
	} {
		cm := ColumnMapping{Logical: lc.logical, Physical: lc.physical}
		switch {
		case lc.physical == "":
			cm.Status = StatusNotMapped
		case has[lc.physical]:
			cm.Status = StatusColumn
		case part[lc.physical]:
			cm.Status = StatusPartition
		default:
			cm.Status = StatusMissing
		}
		out = append(out, cm)
	}
	return out
}

// parquetSchema fills in a Parquet file's columns with their types, groups
// included, and its row count from the metadata.
func parquetSchema(fr *File, src ingest.Source) (err error) {
	r, size, c, err := src.Open()
	if err != nil {
		return err
	}
	defer c.Close()
	defer func() {
		// Last-resort guard: parquet-go may panic on a corrupt footer.
		if v := recover(); v != nil {
			err = fmt.Errorf("%s: corrupt parquet file: %v", src.Name, v)
		}
	}()
	pf, err := parquet.OpenFile(r, size, parquet.SkipPageIndex(true), parquet.SkipBloomFilters(true))
	if err != nil {
		return fmt.Errorf("%s: %w", src.Name, err)
	}
	fr.Rows, fr.RowsFrom = pf.NumRows(), "metadata"
	for _, f := range pf.Schema().Fields() {
		fr.Columns = appendField(fr.Columns, "", f)
	}
	return nil
}

// appendField appends field f, under the group path prefix, and the fields
// inside it.
func appendField(cols []Column, prefix string, f parquet.Field) []Column {
	name := f.Name()
	if prefix != "" {
		name = prefix + "." + name
	}
	rep := "required"
	switch {
	case f.Optional():
		rep = "optional"
	case f.Repeated():
		rep = "repeated"
	}
	if !f.Leaf() {
		cols = append(cols, Column{Name: name, Type: rep + " group"})
		for _, c := range f.Fields() {
			cols = appendField(cols, name, c)
		}
		return cols
	}
	t := f.Type().Kind().String()
	if lt := f.Type().LogicalType(); lt != nil {
		t += " " + lt.String()
	}
	return append(cols, Column{Name: name, Type: rep + " " + t})
}

// countCSVRows counts the records after the header of a CSV source.
func countCSVRows(src ingest.Source, delim rune) (int64, error) {
	f, err := ingest.OpenCSV(src, delim)
	if err != nil {
		return 0, err
	}
	defer f.Close()
	var n int64
	for {
		_, err := f.Read()
		if err == io.EOF {
			return n, nil
		}
		if err != nil {
			return 0, err
		}
		n++
	}
}

// Columns returns a source's columns with their types, in file order (a
// Parquet file's groups and the fields inside them as "group.field"),
// from its header (CSV, with the delimiter; 0 means ',') or its footer
// (Parquet) alone: no row is read.
func Columns(src ingest.Source, delimiter rune) ([]Column, error) {
	fr, err := describe(src, ingest.Options{Delimiter: delimiter})
	if err != nil {
		return nil, err
	}
	return fr.Columns, nil
}
