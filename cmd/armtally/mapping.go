package main

import (
	"errors"
	"fmt"
	"slices"
	"strconv"
	"strings"

	"github.com/spf13/pflag"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/specfile"
	"github.com/armtally/armtally/ingest"
	"github.com/armtally/armtally/ingest/profile"
	"github.com/armtally/armtally/ingest/safetext"
	"github.com/armtally/armtally/report"
)

// mappingFlags are the column-mapping flags that analyze and inspect
// share: --user-col, --ts-col, --event-col, --experiment-col, --arm-col
// and --epoch-unit.
type mappingFlags struct {
	fs *pflag.FlagSet
	m  ingest.Mapping
}

// defineMappingFlags defines the column-mapping flags on fs, in this
// order, with the names of ingest.DefaultMapping as defaults.
func defineMappingFlags(fs *pflag.FlagSet) *mappingFlags {
	mf := &mappingFlags{fs: fs, m: ingest.DefaultMapping()}
	fs.StringVar(&mf.m.User, "user-col", mf.m.User, "column holding the unit (user) id")
	fs.StringVar(&mf.m.TS, "ts-col", mf.m.TS, "column holding the event time")
	fs.StringVar(&mf.m.Event, "event-col", mf.m.Event, "column holding the event name")
	fs.StringVar(&mf.m.Experiment, "experiment-col", mf.m.Experiment, "column holding the experiment key (\"\" when the log has none)")
	fs.StringVar(&mf.m.Arm, "arm-col", mf.m.Arm, "column holding the arm name")
	fs.StringVar(&mf.m.EpochUnit, "epoch-unit", "", "unit of integer timestamps: s, ms, us or ns")
	return mf
}

// flagValue is a string flag's value (src) and the setting it replaces
// (dst).
type flagValue struct {
	flag     string
	dst, src *string
}

// given returns the flags of vs the user gave on fs, or all of them.
func given(fs *pflag.FlagSet, all bool, vs []flagValue) []flagValue {
	var out []flagValue
	for _, v := range vs {
		if all || fs.Changed(v.flag) {
			out = append(out, v)
		}
	}
	return out
}

// apply sets on m each column the user gave a flag for, every one when
// all is set, and checks the epoch unit of the result; cmd names the
// command in the error.
func (mf *mappingFlags) apply(m *ingest.Mapping, all bool, cmd string) error {
	for _, c := range given(mf.fs, all, []flagValue{
		{"user-col", &m.User, &mf.m.User}, {"ts-col", &m.TS, &mf.m.TS}, {"event-col", &m.Event, &mf.m.Event},
		{"experiment-col", &m.Experiment, &mf.m.Experiment}, {"arm-col", &m.Arm, &mf.m.Arm},
		{"epoch-unit", &m.EpochUnit, &mf.m.EpochUnit},
	}) {
		*c.dst = *c.src
	}
	switch m.EpochUnit {
	case "", "s", "ms", "us", "ns":
		return nil
	}
	return usagef("%s: --epoch-unit %q: want s, ms, us or ns", cmd, m.EpochUnit)
}

// tableFlags are the flags of a counts table's columns (--metric-col,
// --units-col, --conversions-col, --immature-col), the flag forms of the
// spec file's columns.metric, units, conversions and immature.
type tableFlags struct {
	fs     *pflag.FlagSet
	counts ingest.CountsOptions
}

// defaultCounts returns the column names of a counts table that no flag
// or spec key renames.
func defaultCounts() ingest.CountsOptions {
	return ingest.CountsOptions{Metric: experiment.ColMetric, Units: experiment.ColUnits, Conversions: experiment.ColConversions}
}

// defineTableFlags defines the counts-table column flags on fs.
func defineTableFlags(fs *pflag.FlagSet) *tableFlags {
	tf := &tableFlags{fs: fs, counts: defaultCounts()}
	fs.StringVar(&tf.counts.Metric, "metric-col", tf.counts.Metric, "counts table: column holding the metric name")
	fs.StringVar(&tf.counts.Units, "units-col", tf.counts.Units, "counts table: column holding the number of units")
	fs.StringVar(&tf.counts.Conversions, "conversions-col", tf.counts.Conversions, "counts table: column holding the number of converted units")
	fs.StringVar(&tf.counts.Immature, "immature-col", "", "counts table: column holding the number of immature units (default: none)")
	return tf
}

// apply sets on c each counts column the user gave a flag for; they are
// only for a counts table.
func (tf *tableFlags) apply(c *ingest.CountsOptions, shape experiment.InputShape) error {
	for _, col := range given(tf.fs, false, []flagValue{
		{"metric-col", &c.Metric, &tf.counts.Metric}, {"units-col", &c.Units, &tf.counts.Units},
		{"conversions-col", &c.Conversions, &tf.counts.Conversions}, {"immature-col", &c.Immature, &tf.counts.Immature},
	}) {
		if shape != experiment.InputCounts {
			return usagef("analyze: --%s is for a counts table (--input-shape counts); the input shape is %q", col.flag, specfile.ShapeName(shape))
		}
		if *col.src == "" {
			return usagef("analyze: --%s: empty column name", col.flag)
		}
		*col.dst = *col.src
	}
	return nil
}

// applyShape sets the run's input shape and a counts table's columns: the
// spec file's, then the flags'. The demo is an event log.
func applyShape(fs *pflag.FlagSet, f *analyzeFlags, sf *specfile.File, run *analyzeRun) error {
	run.shape, run.counts = experiment.InputEventLog, defaultCounts()
	if sf != nil {
		run.shape, run.counts = sf.Shape, sf.Counts
	}
	if sf == nil || fs.Changed("input-shape") {
		s, err := specfile.ParseShape(f.exp.Shape)
		if err != nil {
			return usagef("analyze: --input-shape %v", err)
		}
		run.shape = s
	}
	if f.demo && run.shape != experiment.InputEventLog {
		return usagef("analyze: the demo is an event log, not a %s table (--input-shape %s)", tableName(run.shape), specfile.ShapeName(run.shape))
	}
	return f.tables.apply(&run.counts, run.shape)
}

// checkTableReading refuses the reading settings the unit and counts
// table readers do not have yet: a delimiter other than "," and a bad-row
// budget. (A spec file's own keys are refused by File.Unsupported.)
func checkTableReading(run *analyzeRun) error {
	if run.shape == experiment.InputEventLog {
		return nil
	}
	var what string
	switch {
	case run.delimiter != 0 && run.delimiter != ',':
		what = "--delimiter: CSV files of a table are read with \",\" so far"
	case run.maxBadRows != 0 || run.maxBadShare != 0:
		what = "--max-bad-rows and --max-bad-share: the first bad row of a table stops the run so far"
	default:
		return nil
	}
	return usagef("analyze: not supported yet with a %s table (input shape %q): %s", tableName(run.shape), specfile.ShapeName(run.shape), what)
}

// tableName names the table of a shape: "unit" or "counts".
func tableName(s experiment.InputShape) string {
	if s == experiment.InputUnitTable {
		return "unit"
	}
	return "counts"
}

// hintedError is an error with a hint on a line of its own after it.
type hintedError struct {
	err  error
	hint string
}

func (e *hintedError) Error() string { return e.err.Error() + "\n" + e.hint }
func (e *hintedError) Unwrap() error { return e.err }

// withShapeHint adds a hint to err when it is a missing column of a file
// that looks like another input shape than the run reads it as: an event
// log that looks like a unit or counts table, or the reverse. It reads
// the file's header (and, for a CSV file, up to 100 rows), and returns
// err as it is when it cannot.
func withShapeHint(err error, run *analyzeRun) error {
	var ce *ingest.ColumnError
	if !errors.As(err, &ce) || !errors.Is(ce, ingest.ErrMissingColumn) {
		return err
	}
	for _, src := range run.sources {
		if src.Name == ce.File {
			if hint := shapeHint(src, run); hint != "" {
				return &hintedError{err, hint}
			}
			break
		}
	}
	return err
}

// shapeHint returns the hint for src, or "". A file looks like an event
// log when it has the mapped event column or a column whose name holds
// "event"; like a counts table when it has the mapped units and
// conversions columns, or columns whose names hold "units" and "conv";
// like a unit table when it has no event column and 0/1 columns (see
// zeroOneColumns).
func shapeHint(src ingest.Source, run *analyzeRun) string {
	cols, err := profile.Columns(src, run.delimiter)
	if err != nil {
		return ""
	}
	names := make([]string, 0, len(cols)+len(src.Partitions))
	for _, c := range cols {
		names = append(names, c.Name)
	}
	for _, p := range src.Partitions {
		names = append(names, p.Key)
	}
	m, c := run.mapping, run.counts
	name := safetext.Short(src.Name, 200)
	event := findColumn(names, m.Event, "event")
	units, conv := findColumn(names, c.Units, "units"), findColumn(names, c.Conversions, "conv")
	switch {
	case run.shape != experiment.InputEventLog && event != "":
		return fmt.Sprintf("hint: %s looks like an event log (it has the column %s): read it with --input-shape events (input.shape = \"events\" in a spec file), "+
			"and --event-col, --ts-col, --user-col and --arm-col where its columns are not %s, %s, %s and %s",
			name, quoteName(event), quoteName(m.Event), quoteName(m.TS), quoteName(m.User), quoteName(m.Arm))
	case run.shape != experiment.InputCounts && units != "" && conv != "" && event == "":
		return fmt.Sprintf("hint: %s looks like a counts table (it has the columns %s and %s): read it with --input-shape counts (input.shape = \"counts\" in a spec file) "+
			"and --metric NAME for each metric in its metric column; --arm-col, --metric-col, --units-col and --conversions-col name its columns when they are not %s, %s, %s and %s",
			name, quoteName(units), quoteName(conv), quoteName(m.Arm), quoteName(c.Metric), quoteName(c.Units), quoteName(c.Conversions))
	case run.shape == experiment.InputUnitTable || event != "":
		return ""
	}
	flags := zeroOneColumns(src, cols, run)
	if len(flags) == 0 {
		return ""
	}
	why := fmt.Sprintf("it has no event column, and %s %s only 0/1 values", quoteNames(flags), report.PluralWord(int64(len(flags)), "holds", "hold"))
	return fmt.Sprintf("hint: %s looks like a unit table (%s): read it with --input-shape units (input.shape = \"units\" in a spec file) "+
		"and --metric NAME=COLUMN for each 0/1 column; --user-col and --arm-col name its unit and arm columns when they are not %s and %s",
		name, why, quoteName(m.User), quoteName(m.Arm))
}

// findColumn returns mapped when names holds it, else the first name that
// holds part (in any case) and "name", else the first that holds part,
// else "": "event_name" before "event_time".
func findColumn(names []string, mapped, part string) string {
	if slices.Contains(names, mapped) {
		return mapped
	}
	found := ""
	for _, n := range names {
		lower := strings.ToLower(n)
		switch {
		case !strings.Contains(lower, part):
		case strings.Contains(lower, "name"):
			return n
		case found == "":
			found = n
		}
	}
	return found
}

// zeroOneColumns returns the columns of src, other than the mapped unit,
// arm and time columns, that look like a unit table's 0/1 metric
// columns: a Parquet file's BOOLEAN columns; a CSV file's columns whose
// values in its first 100 rows are all 0, 1, true, false, yes or no (any
// case), at least one of them set.
func zeroOneColumns(src ingest.Source, cols []profile.Column, run *analyzeRun) []string {
	skip := map[string]bool{run.mapping.User: true, run.mapping.Arm: true, run.mapping.TS: true, run.mapping.Experiment: true}
	var out []string
	if src.Format() == ingest.FormatParquet {
		for _, c := range cols {
			if !skip[c.Name] && strings.HasSuffix(c.Type, " BOOLEAN") {
				out = append(out, c.Name)
			}
		}
		return out
	}
	f, err := ingest.OpenCSV(src, run.delimiter)
	if err != nil {
		return nil
	}
	defer f.Close()
	header := f.Header()
	ok, seen := make([]bool, len(header)), make([]bool, len(header))
	for i := range ok {
		ok[i] = !skip[header[i]]
	}
	for row := 0; row < 100; row++ {
		rec, err := f.Read()
		if err != nil {
			break
		}
		for i, v := range rec {
			if i >= len(ok) {
				break
			}
			switch strings.ToLower(strings.TrimSpace(v)) {
			case "0", "1", "true", "false", "yes", "no":
				seen[i] = true
			case "":
			default:
				ok[i] = false
			}
		}
	}
	for i, h := range header {
		if ok[i] && seen[i] {
			out = append(out, h)
		}
	}
	return out
}

// quoteName quotes a column name from the data for a message.
func quoteName(s string) string { return strconv.Quote(safetext.Short(s, 64)) }

// quoteNames quotes up to five column names and says how many more.
func quoteNames(names []string) string {
	var q []string
	for _, n := range names[:min(len(names), 5)] {
		q = append(q, quoteName(n))
	}
	s := strings.Join(q, ", ")
	if more := len(names) - len(q); more > 0 {
		s += fmt.Sprintf(" and %d more", more)
	}
	return s
}
