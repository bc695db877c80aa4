package specfile

import (
	"errors"
	"fmt"
	"io/fs"
	"strings"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/ingest"
)

// shapeNames are the names input.shape gives the input shapes.
var shapeNames = map[string]experiment.InputShape{
	"events": experiment.InputEventLog,
	"units":  experiment.InputUnitTable,
	"counts": experiment.InputCounts,
}

// shapeName returns the name input.shape gives s: events, units or counts.
func shapeName(s experiment.InputShape) string {
	for name, v := range shapeNames {
		if v == s {
			return name
		}
	}
	return s.String()
}

func (sf *File) parseInput(l *locator, in fileInput) error {
	for i, p := range in.Paths {
		o := l.at(fmt.Sprintf("input.paths[%d]", i))
		if strings.TrimSpace(p) == "" {
			return o.errorf("empty path")
		}
		sf.Paths = append(sf.Paths, sf.resolve(p))
		sf.paths = append(sf.paths, writtenPath{text: p, from: o})
	}
	if in.Shape != nil {
		shape, ok := shapeNames[*in.Shape]
		if !ok {
			return l.at("input.shape").errorf("%q: want events, units or counts", *in.Shape)
		}
		sf.Shape = shape
	}
	if in.Delimiter != nil {
		sf.delimFrom = l.at("input.delimiter")
		d, err := ParseDelimiter(*in.Delimiter)
		if err != nil {
			return sf.delimFrom.errorf("%v", err)
		}
		sf.Delimiter = d
	}
	if in.MaxBadRows != nil {
		sf.badRowFrom = l.at("input.max_bad_rows")
		if *in.MaxBadRows < ingest.NoLimit {
			return sf.badRowFrom.errorf("%d: want 0 or more, or -1 for no limit", *in.MaxBadRows)
		}
		sf.MaxBadRows = *in.MaxBadRows
	}
	if in.MaxBadShare != nil {
		sf.badFrom = l.at("input.max_bad_share")
		if v := *in.MaxBadShare; !(v >= 0 && v <= 1) {
			return sf.badFrom.errorf("%v: want a share from 0 to 1, such as 0.001 (1 allows any share)", v)
		}
		sf.MaxBadShare = *in.MaxBadShare
	}
	seen := map[string]bool{}
	for i, c := range in.PartitionColumns {
		o := l.at(fmt.Sprintf("input.partition_columns[%d]", i))
		if c == "" || seen[c] {
			return o.errorf("%q: empty or repeated column name", c)
		}
		seen[c] = true
	}
	sf.PartitionColumns = in.PartitionColumns
	sf.partFrom = l.at("input.partition_columns")
	return nil
}

func (sf *File) parseColumns(l *locator, c fileColumns) error {
	m := &sf.Mapping
	for _, col := range []struct {
		key      string
		v        *string
		dst      *string
		optional bool
	}{
		{"user", c.User, &m.User, false},
		{"ts", c.TS, &m.TS, false},
		{"event", c.Event, &m.Event, false},
		{"experiment", c.Experiment, &m.Experiment, true},
		{"arm", c.Arm, &m.Arm, true},
	} {
		if col.v == nil {
			continue
		}
		if *col.v == "" && !col.optional {
			return l.at("columns." + col.key).errorf("empty column name")
		}
		*col.dst = *col.v
	}
	sf.TSMapped = c.TS != nil
	if c.EpochUnit != nil {
		switch *c.EpochUnit {
		case "s", "ms", "us", "ns":
		default:
			return l.at("columns.epoch_unit").errorf("%q: want s, ms, us or ns", *c.EpochUnit)
		}
		m.EpochUnit = *c.EpochUnit
	}
	seen := map[string]bool{m.User: true, m.TS: true, m.Event: true, m.Experiment: true, m.Arm: true}
	for i, s := range c.Segments {
		if s == "" || seen[s] {
			return l.at(fmt.Sprintf("columns.segments[%d]", i)).errorf("%q: empty, repeated or already mapped column", s)
		}
		seen[s] = true
		m.Segments = append(m.Segments, s)
	}
	return sf.parseCountsColumns(l, c)
}

// parseCountsColumns reads the column names of a counts table.
func (sf *File) parseCountsColumns(l *locator, c fileColumns) error {
	sf.Counts = ingest.CountsOptions{Metric: experiment.ColMetric, Units: experiment.ColUnits, Conversions: experiment.ColConversions}
	for _, col := range []struct {
		key string
		v   *string
		dst *string
	}{{"metric", c.Metric, &sf.Counts.Metric}, {"units", c.Units, &sf.Counts.Units},
		{"conversions", c.Conversions, &sf.Counts.Conversions}, {"immature", c.Immature, &sf.Counts.Immature}} {
		if col.v == nil {
			continue
		}
		o := l.at("columns." + col.key)
		if *col.v == "" {
			return o.errorf("empty column name")
		}
		if sf.Shape != experiment.InputCounts {
			return o.errorf("is for input.shape = \"counts\" (the shape is %q)", shapeName(sf.Shape))
		}
		*col.dst = *col.v
	}
	return nil
}

func (sf *File) parseOutput(l *locator, o fileOutput) error {
	for _, out := range []struct {
		key string
		v   *string
		dst *string
	}{{"markdown", o.Markdown, &sf.Markdown}, {"json", o.JSON, &sf.JSON}, {"audit", o.Audit, &sf.Audit},
		{"history", o.History, &sf.History}, {"looks_chart", o.LooksChart, &sf.LooksChart}} {
		if out.v == nil {
			continue
		}
		if *out.v == "" {
			return l.at("output." + out.key).errorf("empty path")
		}
		*out.dst = sf.resolve(*out.v)
	}
	if sf.Audit != "" && sf.Shape == experiment.InputCounts {
		return l.at("output.audit").errorf("an audit table lists units, and a counts table (input.shape = \"counts\") has none")
	}
	if sf.History != "" && sf.Shape != experiment.InputEventLog {
		return l.at("output.history").errorf("the history keys each look by the data's freshness, and a %s table has none (input.shape = %q)", shapeName(sf.Shape), shapeName(sf.Shape))
	}
	if o.MaxStaleness != nil {
		d, err := ParseWindow(*o.MaxStaleness)
		if err != nil || d <= 0 {
			return l.at("output.max_staleness").errorf("%q: want a positive duration such as \"36h\" or \"2d\"", *o.MaxStaleness)
		}
		sf.MaxStaleness = d
	}
	sf.FailOnSampleRatio, sf.ExitOnBoundary = o.FailOnSampleRatio, o.ExitOnBoundary
	return nil
}

// writtenPath is an entry of input.paths as the file writes it, and where.
type writtenPath struct {
	text string
	from Origin
}

// PathError is an entry of input.paths that names no input: a file or
// folder that does not exist or cannot be read, a file of an unknown type,
// a pattern that matches no input file or a folder that holds none. It
// names the spec file, the line and the key, and the path as written and
// as resolved against the spec file's folder:
//
//	specs/ab.toml:15: input.paths[0]: "exports/", which is specs/exports (relative paths start at the spec file's folder): no such file or directory
type PathError struct {
	From     Origin
	Written  string // the path as the file writes it
	Resolved string // the path relative paths resolve to
	Err      error
}

func (e *PathError) Error() string {
	why := e.Err
	// The file system's error repeats the path: keep its reason.
	var pe *fs.PathError
	if errors.As(e.Err, &pe) && pe.Path == e.Resolved {
		why = pe.Err
	}
	if e.Written == e.Resolved {
		return fmt.Sprintf("%s: %q: %v", e.From, e.Written, why)
	}
	return fmt.Sprintf("%s: %q, which is %s (relative paths start at the spec file's folder): %v", e.From, e.Written, e.Resolved, why)
}

// Unwrap returns the error of the file system or of ingest.FileSources.
func (e *PathError) Unwrap() error { return e.Err }

// Sources returns the inputs of input.paths by the rules of
// ingest.FileSources, in the file's order. An entry that names no input
// file is a *PathError: every entry must contribute at least one file.
func (sf *File) Sources() ([]ingest.Source, error) {
	var out []ingest.Source
	for i, p := range sf.Paths {
		srcs, err := ingest.FileSources([]string{p})
		if err == nil && len(srcs) == 0 {
			err = fmt.Errorf("no .csv, .csv.gz, .parquet or .parq files in %s", p)
		}
		if err != nil {
			return nil, &PathError{From: sf.paths[i].from, Written: sf.paths[i].text, Resolved: p, Err: err}
		}
		out = append(out, srcs...)
	}
	return out, nil
}
