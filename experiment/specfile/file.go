package specfile

import (
	"bytes"
	"fmt"
	"path/filepath"
	"strings"
	"time"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/ingest"
)

// File is a parsed and checked spec file: where to read, how to map the
// columns, where to write, and the experiments. Paths in it are resolved
// against the file's folder.
type File struct {
	// Name is the file's name as given to Read or Parse.
	Name string
	// Paths are input.paths.
	Paths []string
	// Shape is input.shape: events (the default), units or counts.
	Shape experiment.InputShape
	// Delimiter is input.delimiter, 0 when not set (",").
	Delimiter rune
	// MaxBadRows and MaxBadShare are the bad-row budget, input.max_bad_rows
	// and input.max_bad_share (0 when not set).
	MaxBadRows  int64
	MaxBadShare float64
	// PartitionColumns are input.partition_columns: the key=value folders
	// every source's path must have.
	PartitionColumns []string

	// Mapping is the [columns] table over ingest.DefaultMapping.
	Mapping ingest.Mapping
	// TSMapped says whether columns.ts is set: a unit table's exposure
	// time column is optional.
	TSMapped bool
	// Counts holds a counts table's column names (columns.metric, units,
	// conversions and immature; the defaults are metric, units,
	// conversions and none).
	Counts ingest.CountsOptions

	// Markdown, JSON and Audit are the output paths, "" when not set.
	Markdown, JSON, Audit string
	// FailOnSampleRatio is output.fail_on_sample_ratio, nil when not set.
	FailOnSampleRatio *bool
	// History and LooksChart are output.history and output.looks_chart,
	// "" when not set: the SQLite file of the looks of nightly monitoring
	// and the chart over them. They apply to the run.
	History, LooksChart string
	// MaxStaleness is output.max_staleness, 0 when not set.
	MaxStaleness time.Duration
	// ExitOnBoundary is output.exit_on_boundary, nil when not set.
	ExitOnBoundary *bool

	// Experiments are the [[experiment]] tables, in the file's order.
	Experiments []*Settings

	dir   string        // the folder relative paths start from
	paths []writtenPath // input.paths as written, with their origins

	delimFrom, badRowFrom, badFrom, partFrom Origin
}

// Read reads and parses the spec file at path (see Parse). An error
// reading it is returned as the file system gave it (an *fs.PathError);
// a file larger than MaxFileSize is an *Error, found before the file is
// read whole.
func Read(path string) (*File, error) { return ReadLimit(path, MaxFileSize) }

// ReadLimit is Read with another limit on the file's size in bytes
// (positive; MaxFileSize for Read).
func ReadLimit(path string, limit int64) (*File, error) {
	if limit <= 0 {
		return nil, fmt.Errorf("spec file size limit %d: want a positive number of bytes", limit)
	}
	data, err := readLimited(path, limit)
	if err != nil {
		return nil, err
	}
	return Parse(path, data)
}

// Parse parses a spec file named name (relative paths inside it start from
// name's folder). Unknown keys, values of the wrong type and values that
// contradict each other are errors naming the file, the line and the key
// (*Error or Errors). Keys whose feature is not available yet are accepted
// here and refused by Unsupported. A UTF-8 byte-order mark at the start
// is skipped; a file with no keys, or nested deeper than MaxNesting, is
// an *Error.
func Parse(name string, data []byte) (*File, error) {
	data = bytes.TrimPrefix(data, utf8BOM)
	if err := checkDocument(name, data); err != nil {
		return nil, err
	}
	var fsp fileSpec
	l, err := decodeSpec(name, data, &fsp)
	if err != nil {
		return nil, err
	}
	if err := l.checkKeys(); err != nil {
		return nil, err
	}
	if err := l.checkExperimentArray(len(fsp.Experiment)); err != nil {
		return nil, err
	}
	sf := &File{Name: name, dir: filepath.Dir(name), Mapping: ingest.DefaultMapping(), Shape: experiment.InputEventLog}
	if err := sf.parseInput(l, fsp.Input); err != nil {
		return nil, err
	}
	if err := sf.parseColumns(l, fsp.Columns); err != nil {
		return nil, err
	}
	if err := sf.parseOutput(l, fsp.Output); err != nil {
		return nil, err
	}
	if err := sf.parseExperiments(l, fsp.Experiment); err != nil {
		return nil, err
	}
	return sf, nil
}

// checkExperimentArray checks that experiment is an array of tables when
// the file has n experiments.
func (l *locator) checkExperimentArray(n int) error {
	if _, ok := l.lines["experiment[0]"]; n == 0 || ok {
		return nil
	}
	// The decoder takes a lone table for a one-element list; in TOML,
	// [[experiment.metric]] before any [[experiment]] makes experiment a
	// plain table.
	line := 0
	for p, ln := range l.lines {
		if strings.HasPrefix(p, "experiment") && (line == 0 || ln < line) {
			line = ln
		}
	}
	return &Error{File: l.file, Line: line, Key: "experiment",
		Msg: "want an array of tables: start each experiment with [[experiment]], before its [[experiment.metric]] tables"}
}

// parseExperiments checks the [[experiment]] tables one by one and against
// each other.
func (sf *File) parseExperiments(l *locator, fes []fileExperiment) error {
	keys := map[string]string{}
	for i, fe := range fes {
		e, err := sf.parseExperiment(l, i, fe)
		if err != nil {
			return err
		}
		if len(fes) > 1 && e.key == "" {
			o := l.at(fmt.Sprintf("experiment[%d].key", i))
			return o.errorf("every experiment needs a key when the file has several (%d)", len(fes))
		}
		if prev, dup := keys[e.key]; dup {
			return e.from["key"].errorf("experiment key %q is also the key of %s", e.key, prev)
		}
		keys[e.key] = e.from["key"].String()
		if i > 0 && sf.Shape != experiment.InputEventLog {
			return e.from["experiment"].errorf("a %s table holds one experiment; this file has %d (input.shape = %q)",
				map[experiment.InputShape]string{experiment.InputUnitTable: "unit", experiment.InputCounts: "counts"}[sf.Shape],
				len(fes), shapeName(sf.Shape))
		}
		// Check the experiment as it stands, so that contradictions are
		// reported against the file even before flags are applied.
		if _, _, err := e.Build(); err != nil {
			return err
		}
		sf.Experiments = append(sf.Experiments, e)
	}
	return nil
}

// resolve makes a path from the file relative to the file's folder.
func (sf *File) resolve(p string) string {
	if filepath.IsAbs(p) {
		return p
	}
	return filepath.Join(sf.dir, p)
}

// Unsupported returns an error for the first key that asks for a feature
// armtally does not have yet: "not supported yet: KEY".
func (sf *File) Unsupported() error {
	nope := func(o Origin, what string) error {
		msg := "not supported yet: " + o.Key
		if what != "" {
			msg += " (" + what + ")"
		}
		return &Error{File: o.File, Line: o.Line, Msg: msg}
	}
	if sf.Shape != experiment.InputEventLog {
		table := fmt.Sprintf("with input.shape = %q", shapeName(sf.Shape))
		switch {
		case sf.Delimiter != 0 && sf.Delimiter != ',':
			return nope(sf.delimFrom, table+" CSV files are read with \",\" so far")
		case sf.MaxBadRows != 0:
			return nope(sf.badRowFrom, table+" the first bad row stops the run so far")
		case sf.MaxBadShare != 0:
			return nope(sf.badFrom, table+" the first bad row stops the run so far")
		}
	}
	return nil
}

// CheckPartitions checks that every source has the partition keys
// input.partition_columns lists. Its error is about the data: it names
// the source and the key missing from its path.
func (sf *File) CheckPartitions(sources []ingest.Source) error {
	for _, key := range sf.PartitionColumns {
		for _, src := range sources {
			found := false
			for _, p := range src.Partitions {
				found = found || p.Key == key
			}
			if !found {
				var have []string
				for _, p := range src.Partitions {
					have = append(have, p.Key)
				}
				return fmt.Errorf("%s: no partition folder %s=... on its path (input.partition_columns at %s:%d; its partitions: %s)",
					src.Name, key, sf.partFrom.File, sf.partFrom.Line, listOrNone(have))
			}
		}
	}
	return nil
}

func listOrNone(list []string) string {
	if len(list) == 0 {
		return "none"
	}
	return strings.Join(list, ", ")
}
