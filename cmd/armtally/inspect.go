package main

import (
	"bufio"
	"bytes"
	"compress/gzip"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"sort"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/parquet-go/parquet-go"
	"github.com/spf13/pflag"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/ingest"
	"github.com/armtally/armtally/report"
	"github.com/armtally/armtally/sampledata"
)

const inspectUsage = `Usage: armtally inspect [flags] FILE|FOLDER|PATTERN...
       armtally inspect --demo [flags]

Shows what an event log holds before a full run: for each file its format,
its columns and their types, its row count (Parquet: from the file's
metadata; CSV: counted) and which of its columns armtally would read as
each logical column (user, ts, event, experiment, arm) under the column
mapping flags, and which are missing; then, over all files, the
experiments and arms seen on exposure rows with their row counts, the
event names with their row counts (the most frequent first) and the time
range of the valid rows.

Bad rows are counted by reason, with the first of each, and skipped; a
file that lacks a mapped column is described but its rows are not read.
The output is text, the same for the same input; --json also writes it as
JSON. The exit code is 3 when a file lacks a mapped column (the report is
still written), 0 otherwise, bad rows or not.

Examples:
  armtally inspect --demo
  armtally inspect exports/ --user-col visitor_id --ts-col event_time
  armtally inspect events.csv --delimiter tab --epoch-unit ms --json inspect.json

Flags:
`

// inspectFlags holds the values of the inspect flags.
type inspectFlags struct {
	demo                                     bool
	userCol, tsCol, eventCol, expCol, armCol string
	epochUnit, exposureEvent, delimiter      string
	top                                      int
	jsonOut                                  string
}

// inspectReport is what inspect shows; the JSON output has this layout.
type inspectReport struct {
	Files []fileReport `json:"files"`
	// RowsRead is the number of rows read from the files whose mapped
	// columns are all there; ValidRows of them were valid.
	RowsRead  int64 `json:"rows_read"`
	ValidRows int64 `json:"valid_rows"`
	// BadRows counts the bad rows by reason; BadRowExamples gives the
	// first of each reason.
	BadRows        []experiment.ReasonCount `json:"bad_rows"`
	BadRowExamples []string                 `json:"bad_row_examples"`
	// ExposureEvent is the event name of exposure rows.
	ExposureEvent string          `json:"exposure_event"`
	Exposures     []exposureCount `json:"exposures"`
	// Events counts rows by event name, most frequent first (then by
	// name); EventsShown of them are shown in the text.
	Events      []eventCount `json:"events"`
	EventsShown int          `json:"events_shown"`
	// First and Last are the earliest and latest ts of the valid rows.
	First *time.Time `json:"first_ts"`
	Last  *time.Time `json:"last_ts"`
}

// fileReport describes one file.
type fileReport struct {
	Name   string `json:"name"`
	Format string `json:"format"`
	// Rows is the number of rows: from the metadata for Parquet, counted
	// for CSV; RowsFrom says which.
	Rows     int64          `json:"rows"`
	RowsFrom string         `json:"rows_from"`
	Columns  []columnReport `json:"columns"`
	// Partitions are the key=value folder names on the file's path.
	Partitions []ingest.Partition `json:"partitions"`
	Mapping    []mappingReport    `json:"mapping"`
	// Error says why the file's rows were not read, or "".
	Error string `json:"error,omitempty"`
}

// columnReport is one physical column.
type columnReport struct {
	Name string `json:"name"`
	Type string `json:"type"`
}

// mappingReport says which physical column a logical column is read from.
type mappingReport struct {
	Logical  string `json:"logical"`
	Physical string `json:"physical"`
	// Status is "column", "partition" (a key=value folder name), "missing"
	// or "not mapped".
	Status string `json:"status"`
}

type exposureCount struct {
	Experiment string `json:"experiment"`
	Arm        string `json:"arm"`
	Rows       int64  `json:"rows"`
}

type eventCount struct {
	Event string `json:"event"`
	Rows  int64  `json:"rows"`
}

// noValue stands for a null or missing experiment or arm in the output.
const noValue = "(none)"

func runInspect(args []string, stdout, stderr io.Writer) error {
	var f inspectFlags
	fs := pflag.NewFlagSet("inspect", pflag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.SortFlags = false
	m := ingest.DefaultMapping()
	fs.BoolVar(&f.demo, "demo", false, "inspect the embedded demo event log")
	fs.StringVar(&f.userCol, "user-col", m.User, "column holding the unit (user) id")
	fs.StringVar(&f.tsCol, "ts-col", m.TS, "column holding the event time")
	fs.StringVar(&f.eventCol, "event-col", m.Event, "column holding the event name")
	fs.StringVar(&f.expCol, "experiment-col", m.Experiment, "column holding the experiment key (\"\" when the log has none)")
	fs.StringVar(&f.armCol, "arm-col", m.Arm, "column holding the arm name")
	fs.StringVar(&f.epochUnit, "epoch-unit", "", "unit of integer timestamps: s, ms, us or ns")
	fs.StringVar(&f.exposureEvent, "exposure-event", "exposure", "event name of exposure rows")
	fs.StringVar(&f.delimiter, "delimiter", ",", "field separator of CSV files: one character; tab or \\t for a tab")
	fs.IntVar(&f.top, "top", 20, "event names to show, the most frequent first")
	fs.StringVar(&f.jsonOut, "json", "", "also write the report as JSON to this file")
	if err := parseFlags(fs, args, inspectUsage, stdout); err != nil {
		return err
	}
	mapping := ingest.Mapping{User: f.userCol, TS: f.tsCol, Event: f.eventCol, Experiment: f.expCol, Arm: f.armCol, EpochUnit: f.epochUnit}
	switch f.epochUnit {
	case "", "s", "ms", "us", "ns":
	default:
		return usagef("inspect: --epoch-unit %q: want s, ms, us or ns", f.epochUnit)
	}
	delim, err := parseDelimiter(f.delimiter)
	if err != nil {
		return usagef("inspect: --delimiter: %v", err)
	}
	if f.top < 0 {
		return usagef("inspect: --top %d: want 0 or more", f.top)
	}
	if f.exposureEvent == "" {
		return usagef("inspect: --exposure-event must not be empty")
	}
	var sources []ingest.Source
	var demoData []byte
	switch {
	case f.demo && fs.NArg() > 0:
		return usagef("inspect: --demo takes no input files (got %s)", strings.Join(fs.Args(), " "))
	case f.demo:
		var name string
		name, demoData = sampledata.Demo()
		sources = []ingest.Source{ingest.BytesSource(name, demoData)}
	case fs.NArg() == 0:
		return usagef("inspect: name at least one input file or folder, or use --demo")
	default:
		if sources, err = ingest.FileSources(fs.Args()); err != nil {
			return &dataError{err}
		}
		if len(sources) == 0 {
			return &dataError{fmt.Errorf("no .csv, .csv.gz, .parquet or .parq files in %s", strings.Join(fs.Args(), ", "))}
		}
	}
	open := func(src ingest.Source) (io.ReaderAt, int64, io.Closer, error) {
		if demoData != nil {
			return bytes.NewReader(demoData), int64(len(demoData)), io.NopCloser(nil), nil
		}
		file, err := os.Open(src.Name)
		if err != nil {
			return nil, 0, nil, err
		}
		info, err := file.Stat()
		if err != nil {
			file.Close()
			return nil, 0, nil, err
		}
		return file, info.Size(), file, nil
	}
	rep, err := inspect(sources, open, ingest.Options{Mapping: mapping, ExposureEvent: f.exposureEvent,
		Delimiter: delim, MaxBadRows: ingest.NoLimit}, f.top)
	if err != nil {
		return err
	}
	if f.jsonOut != "" {
		err := report.WriteFileAtomic(f.jsonOut, func(w io.Writer) error {
			enc := json.NewEncoder(w)
			enc.SetIndent("", "  ")
			return enc.Encode(rep)
		})
		if err != nil {
			return fmt.Errorf("writing the JSON report: %w", err)
		}
	}
	if err := writeInspect(stdout, rep); err != nil {
		return err
	}
	var unread []string
	for _, f := range rep.Files {
		if f.Error != "" {
			unread = append(unread, f.Name)
		}
	}
	if len(unread) > 0 {
		return &dataError{fmt.Errorf("inspect: the rows of %s were not read: a mapped column is missing (see the mapping above)", strings.Join(unread, ", "))}
	}
	return nil
}

// opener opens a source for its metadata.
type opener func(ingest.Source) (io.ReaderAt, int64, io.Closer, error)

// inspect reads each source's metadata and rows and returns the report.
// opts must have a bad-row budget with no limit, so that bad rows are
// counted rather than fatal.
func inspect(sources []ingest.Source, open opener, opts ingest.Options, top int) (*inspectReport, error) {
	rep := &inspectReport{ExposureEvent: opts.ExposureEvent, Exposures: []exposureCount{}, Events: []eventCount{},
		BadRows: []experiment.ReasonCount{}, BadRowExamples: []string{}}
	exposures := map[[2]string]int64{}
	events := map[string]int64{}
	bad := map[string]int64{}
	var badOrder []string
	var first, last int64
	var hasTS bool
	for _, src := range sources {
		fr, err := describeFile(src, open, opts)
		if err != nil {
			return nil, &dataError{err}
		}
		r, err := ingest.NewReader([]ingest.Source{src}, opts)
		if err != nil {
			return nil, usagef("inspect: %v", err)
		}
		for r.Next() {
			rec := r.RecordBatch()
			n := int(rec.NumRows())
			ev := column(rec, experiment.ColEvent)
			ex := column(rec, experiment.ColExperiment)
			arm := column(rec, experiment.ColArm)
			ts := rec.Column(rec.Schema().FieldIndices(experiment.ColTS)[0]).(*array.Timestamp).TimestampValues()
			for i := 0; i < n; i++ {
				name := ev.Value(i)
				events[name]++
				if name == opts.ExposureEvent {
					exposures[[2]string{value(ex, i), value(arm, i)}]++
				}
				t := int64(ts[i])
				if !hasTS || t < first {
					first = t
				}
				if !hasTS || t > last {
					last = t
				}
				hasTS = true
			}
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
			return nil, &dataError{rerr}
		}
		if strings.HasPrefix(fr.Format, "CSV") {
			if rerr == nil {
				fr.Rows, fr.RowsFrom = st.RowsRead, "counted"
			} else if fr.Rows, err = countCSVRows(src, open, opts.Delimiter); err != nil {
				return nil, &dataError{err}
			}
		}
		rep.RowsRead += st.RowsRead
		rep.ValidRows += st.Rows
		for i, b := range st.BadRows {
			reason := b.Reason.String()
			if _, seen := bad[reason]; !seen {
				badOrder = append(badOrder, reason)
				if i < len(st.BadRowExamples) && st.BadRowExamples[i] != nil {
					rep.BadRowExamples = append(rep.BadRowExamples, st.BadRowExamples[i].Error())
				}
			}
			bad[reason] += b.Count
		}
		rep.Files = append(rep.Files, fr)
	}
	for _, reason := range badOrder {
		rep.BadRows = append(rep.BadRows, experiment.ReasonCount{Reason: reason, Count: bad[reason]})
	}
	for k, n := range exposures {
		rep.Exposures = append(rep.Exposures, exposureCount{Experiment: k[0], Arm: k[1], Rows: n})
	}
	sort.Slice(rep.Exposures, func(i, j int) bool {
		a, b := rep.Exposures[i], rep.Exposures[j]
		if a.Experiment != b.Experiment {
			return a.Experiment < b.Experiment
		}
		return a.Arm < b.Arm
	})
	for name, n := range events {
		rep.Events = append(rep.Events, eventCount{Event: name, Rows: n})
	}
	sort.Slice(rep.Events, func(i, j int) bool {
		a, b := rep.Events[i], rep.Events[j]
		if a.Rows != b.Rows {
			return a.Rows > b.Rows
		}
		return a.Event < b.Event
	})
	rep.EventsShown = min(top, len(rep.Events))
	if hasTS {
		f, l := time.Unix(0, first).UTC(), time.Unix(0, last).UTC()
		rep.First, rep.Last = &f, &l
	}
	return rep, nil
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

// value returns row i of c, or noValue for a null or a missing column.
func value(c *array.String, i int) string {
	if c == nil || c.IsNull(i) {
		return noValue
	}
	return c.Value(i)
}

// describeFile returns a file's format, columns, row count (Parquet) and
// mapping.
func describeFile(src ingest.Source, open opener, opts ingest.Options) (fileReport, error) {
	fr := fileReport{Name: src.Name, Partitions: src.Partitions, Columns: []columnReport{}}
	if fr.Partitions == nil {
		fr.Partitions = []ingest.Partition{}
	}
	lower := strings.ToLower(src.Name)
	switch {
	case strings.HasSuffix(lower, ".parquet") || strings.HasSuffix(lower, ".parq"):
		fr.Format = "Parquet"
		if err := parquetSchema(&fr, src, open); err != nil {
			return fr, err
		}
	case strings.HasSuffix(lower, ".csv"), strings.HasSuffix(lower, ".csv.gz"):
		fr.Format = "CSV"
		if strings.HasSuffix(lower, ".gz") {
			fr.Format = "CSV (gzip)"
		}
		header, err := csvHeader(src, open, opts.Delimiter)
		if err != nil {
			return fr, err
		}
		for _, h := range header {
			fr.Columns = append(fr.Columns, columnReport{Name: h, Type: "text"})
		}
	default:
		return fr, fmt.Errorf("%s: unknown file type", src.Name)
	}
	has := map[string]bool{}
	for _, c := range fr.Columns {
		has[c.Name] = true
	}
	part := map[string]bool{}
	for _, p := range src.Partitions {
		part[p.Key] = true
	}
	m := opts.Mapping
	for _, lc := range []struct{ logical, physical string }{
		{experiment.ColUser, m.User}, {experiment.ColTS, m.TS}, {experiment.ColEvent, m.Event},
		{experiment.ColExperiment, m.Experiment}, {experiment.ColArm, m.Arm},
	} {
		mr := mappingReport{Logical: lc.logical, Physical: lc.physical}
		switch {
		case lc.physical == "":
			mr.Status = "not mapped"
		case has[lc.physical]:
			mr.Status = "column"
		case part[lc.physical]:
			mr.Status = "partition"
		default:
			mr.Status = "missing"
		}
		fr.Mapping = append(fr.Mapping, mr)
	}
	return fr, nil
}

// parquetSchema fills in a Parquet file's leaf columns with their types
// and its row count from the metadata.
func parquetSchema(fr *fileReport, src ingest.Source, open opener) (err error) {
	r, size, c, err := open(src)
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
	var walk func(prefix string, f parquet.Field)
	walk = func(prefix string, f parquet.Field) {
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
			fr.Columns = append(fr.Columns, columnReport{Name: name, Type: rep + " group"})
			for _, c := range f.Fields() {
				walk(name, c)
			}
			return
		}
		t := f.Type().Kind().String()
		if lt := f.Type().LogicalType(); lt != nil {
			t += " " + lt.String()
		}
		fr.Columns = append(fr.Columns, columnReport{Name: name, Type: rep + " " + t})
	}
	for _, f := range pf.Schema().Fields() {
		walk("", f)
	}
	return nil
}

// csvReader opens a CSV source (gzip-compressed when its name ends in .gz)
// as an encoding/csv reader with the delimiter, past a UTF-8 byte order
// mark.
func csvReader(src ingest.Source, open opener, delim rune) (*csv.Reader, io.Closer, error) {
	r, size, c, err := open(src)
	if err != nil {
		return nil, nil, err
	}
	var in io.Reader = io.NewSectionReader(r, 0, size)
	if strings.HasSuffix(strings.ToLower(src.Name), ".gz") {
		gz, err := gzip.NewReader(in)
		if err != nil {
			c.Close()
			return nil, nil, fmt.Errorf("%s: %w", src.Name, err)
		}
		in = gz
	}
	br := bufio.NewReader(in)
	if b, err := br.Peek(3); err == nil && string(b) == "\xEF\xBB\xBF" {
		br.Discard(3)
	}
	cr := csv.NewReader(br)
	cr.FieldsPerRecord = -1
	cr.ReuseRecord = true
	if delim != 0 {
		cr.Comma = delim
	}
	return cr, c, nil
}

// csvHeader returns the header of a CSV source.
func csvHeader(src ingest.Source, open opener, delim rune) ([]string, error) {
	cr, c, err := csvReader(src, open, delim)
	if err != nil {
		return nil, err
	}
	defer c.Close()
	h, err := cr.Read()
	if err == io.EOF {
		return nil, fmt.Errorf("%s: empty file: want a header row", src.Name)
	}
	if err != nil {
		return nil, fmt.Errorf("%s: %w", src.Name, err)
	}
	return append([]string(nil), h...), nil
}

// countCSVRows counts the records after the header of a CSV source.
func countCSVRows(src ingest.Source, open opener, delim rune) (int64, error) {
	cr, c, err := csvReader(src, open, delim)
	if err != nil {
		return 0, err
	}
	defer c.Close()
	var n int64 = -1 // the header
	for {
		_, err := cr.Read()
		if err == io.EOF {
			return max(n, 0), nil
		}
		if err != nil {
			return 0, fmt.Errorf("%s: %w", src.Name, err)
		}
		n++
	}
}

// writeInspect writes the report as text.
func writeInspect(w io.Writer, rep *inspectReport) error {
	var b bytes.Buffer
	tw := func() *tabwriter.Writer { return tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0) }
	for _, f := range rep.Files {
		fmt.Fprintf(&b, "%s\n", f.Name)
		rows := "rows counted"
		if f.RowsFrom == "metadata" {
			rows = "rows (from the file's metadata)"
		}
		fmt.Fprintf(&b, "  format: %s, %d columns, %s %s\n", f.Format, len(f.Columns), formatInt(f.Rows), rows)
		if len(f.Partitions) > 0 {
			var ps []string
			for _, p := range f.Partitions {
				ps = append(ps, p.Key+"="+p.Value)
			}
			fmt.Fprintf(&b, "  partitions: %s\n", strings.Join(ps, ", "))
		}
		b.WriteString("  columns:\n")
		t := tw()
		for _, c := range f.Columns {
			fmt.Fprintf(t, "    %s\t%s\n", c.Name, c.Type)
		}
		t.Flush()
		b.WriteString("  mapping:\n")
		t = tw()
		for _, m := range f.Mapping {
			switch m.Status {
			case "column":
				fmt.Fprintf(t, "    %s\t<- %s\n", m.Logical, m.Physical)
			case "partition":
				fmt.Fprintf(t, "    %s\t<- %s (partition folder)\n", m.Logical, m.Physical)
			case "not mapped":
				fmt.Fprintf(t, "    %s\tnot mapped\n", m.Logical)
			default:
				fmt.Fprintf(t, "    %s\tMISSING: no column %q\n", m.Logical, m.Physical)
			}
		}
		t.Flush()
		if f.Error != "" {
			fmt.Fprintf(&b, "  rows not read: %s\n", f.Error)
		}
		b.WriteString("\n")
	}
	fmt.Fprintf(&b, "rows read: %s in %s; %s valid, %s bad\n", formatInt(rep.RowsRead), plural(len(rep.Files), "file", "files"),
		formatInt(rep.ValidRows), formatInt(rep.RowsRead-rep.ValidRows))
	for _, r := range rep.BadRows {
		fmt.Fprintf(&b, "  %s: %s\n", r.Reason, formatInt(r.Count))
	}
	for i, e := range rep.BadRowExamples {
		if i == 0 {
			b.WriteString("  first bad row of each reason:\n")
		}
		fmt.Fprintf(&b, "    %s\n", e)
	}
	if rep.First != nil {
		fmt.Fprintf(&b, "time range: %s to %s\n", rep.First.Format(time.RFC3339Nano), rep.Last.Format(time.RFC3339Nano))
	} else {
		b.WriteString("time range: no valid rows\n")
	}
	fmt.Fprintf(&b, "\nexposure rows (event %q) by experiment and arm:\n", rep.ExposureEvent)
	if len(rep.Exposures) == 0 {
		b.WriteString("  none\n")
	}
	t := tw()
	var total int64
	for _, e := range rep.Exposures {
		fmt.Fprintf(t, "  %s\t%s\t%s\n", e.Experiment, e.Arm, formatInt(e.Rows))
		total += e.Rows
	}
	t.Flush()
	if len(rep.Exposures) > 0 {
		fmt.Fprintf(&b, "  total %s\n", formatInt(total))
	}
	fmt.Fprintf(&b, "\nevents (%s names) by rows:\n", formatInt(int64(len(rep.Events))))
	t = tw()
	for _, e := range rep.Events[:rep.EventsShown] {
		fmt.Fprintf(t, "  %s\t%s\n", e.Event, formatInt(e.Rows))
	}
	t.Flush()
	if more := rep.Events[rep.EventsShown:]; len(more) > 0 {
		var rows int64
		for _, e := range more {
			rows += e.Rows
		}
		noun := "names"
		if len(more) == 1 {
			noun = "name"
		}
		fmt.Fprintf(&b, "  %s more %s (%s)\n", formatInt(int64(len(more))), noun, plural64(rows, "row", "rows"))
	}
	_, err := w.Write(b.Bytes())
	return err
}

// formatInt writes n with thousands separators.
func formatInt(n int64) string {
	s := fmt.Sprint(n)
	neg := strings.HasPrefix(s, "-")
	s = strings.TrimPrefix(s, "-")
	var b strings.Builder
	for i, c := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteByte(',')
		}
		b.WriteRune(c)
	}
	if neg {
		return "-" + b.String()
	}
	return b.String()
}

// plural writes n with the singular or plural noun.
func plural(n int, one, many string) string { return plural64(int64(n), one, many) }

func plural64(n int64, one, many string) string {
	if n == 1 {
		return "1 " + one
	}
	return formatInt(n) + " " + many
}
