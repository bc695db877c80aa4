// Package pipeline runs armtally's whole analysis as one call: it reads an
// input (files, folders and patterns, an fs.FS, or any Arrow record
// stream) once, tallies each experiment under the event semantics, and
// analyses each tally into a readout.
//
// It owns every step between the reader and the statistics, so that a
// nightly job written in Go, the command line and the benchmarks run the
// same recipe:
//
//   - the reader of the input shape (event log, unit table, counts table);
//   - the event filter: the talliers name the events they use
//     (experiment.Tallier.Events), the reader drops the rows of every other
//     event after checking them (ingest.Options.Events), and their count
//     and latest time go back to the talliers (AddFiltered) so that the
//     diagnostics and the maturity horizon are those of the whole log;
//   - fan-out of each record batch to one tallier per experiment;
//   - with a memory limit, the rows spilled to disk in hash partitions of
//     the units, tallied a group at a time with the freshness of the whole
//     input (SeeTime) and merged (experiment.MergeTallies);
//   - the reader's rows read and bad rows passed to the analysis;
//   - each tally checked against the names its settings give (experiment
//     key, exposure event, control and planned arms, the metrics' events):
//     a name the input does not hold stops the run with a
//     *NotInDataError listing what it holds, rather than a readout of
//     zero counts; a log of one experiment key, given none, is analysed
//     under that key.
//
// The readouts are the same bytes whichever way the rows arrive.
package pipeline

import (
	"context"
	"errors"
	"fmt"
	"io/fs"
	"iter"
	"slices"

	"github.com/apache/arrow-go/v18/arrow/array"

	"github.com/apache/arrow-go/v18/arrow"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/ingest"
)

// Input is where the rows come from and how to read them. Give exactly
// one of Paths (with or without FS), Sources or Records.
type Input struct {
	// Paths are files, folders and glob patterns on disk, or inside FS
	// when FS is set (see ingest.FileSources and ingest.FSSources).
	Paths []string
	// FS, when set, is the file system Paths are read from (all of it
	// when Paths is empty): an embedded folder, a zip archive, a test's
	// fstest.MapFS, a remote store with an fs.FS adapter.
	FS fs.FS
	// Sources are inputs already resolved, such as ingest.BytesSource.
	Sources []ingest.Source
	// Records is an Arrow record stream of the event log, from the
	// caller's own query engine, read with the column mapping (see
	// ingest.NewArrowReader for the column types it takes); RecordsName
	// labels it in errors ("arrow stream" when empty). The run takes
	// its own reference and releases it; the caller still releases its
	// own.
	Records     array.RecordReader
	RecordsName string

	// Shape is the input shape: event log (the zero value), unit table
	// or counts table. A table holds one experiment.
	Shape experiment.InputShape
	// Mapping names the columns. With none of User, TS, Event,
	// Experiment and Arm set, the names of ingest.DefaultMapping are used
	// (with this mapping's Segments and EpochUnit).
	Mapping ingest.Mapping
	// UnitTS is the exposure time column of a unit table; "" when it has
	// none.
	UnitTS string
	// Counts names the columns of a counts table; the arm, segment and
	// metric columns come from Mapping and the experiment.
	Counts ingest.CountsOptions
	// Delimiter is the field separator of CSV files; 0 means a comma.
	Delimiter rune
	// MaxBadRows and MaxBadShare are the bad-row budget of an event log
	// (see ingest.Options).
	MaxBadRows  int64
	MaxBadShare float64
}

// Experiment is one experiment to tally and analyse.
type Experiment struct {
	Spec    experiment.Spec
	Options experiment.AnalysisOptions
	// MetricColumns maps each metric to its 0/1 column of a unit table;
	// a metric left out is read from the column of its own name.
	MetricColumns []ingest.ColumnMap
	// AllowAbsentEvents lists events of the metrics that may occur in no
	// row of an event log (a genuinely rare event): without it, such an
	// event stops the run with a *NotInDataError. Each must be an event
	// of one of the experiment's metrics.
	AllowAbsentEvents []string
}

// Options are the settings of a run that do not change its numbers.
type Options struct {
	// MemoryLimit, when positive, keeps the per-unit state of an event log
	// under about this many bytes: the rows go to disk in hash partitions
	// of the units (in SpillDir, or the system's temporary folder), are
	// tallied a group of partitions at a time and merged. It rules out
	// KeepUnits. The caller may also want debug.SetMemoryLimit, which is
	// process-wide and so left to it.
	MemoryLimit int64
	SpillDir    string
	// KeepUnits keeps the per-unit records for Result.Units.
	KeepUnits bool
	// Workers bounds the goroutines that decode Parquet row groups; 0
	// means GOMAXPROCS.
	Workers int
	// Progress, when set, is called once reading starts with a function
	// that returns the rows read so far (safe from any goroutine); the
	// function it returns is called once reading ends. Inputs that cannot
	// count as they go (unit and counts tables) do not call it.
	Progress func(rows func() int64) (stop func())
	// State, when set, is the path of the state file of an incremental
	// run over an event log that grows by new files (a nightly job over
	// dt=YYYY-MM-DD/ folders): the run reads only the files the state
	// file does not list, merges them into its saved tallies and writes
	// it anew; the readouts are those of a run over every file (see
	// state.go for when it reads every file instead). It rules out a
	// memory limit and Arrow record streams.
	State string
	// BeforeRead, when set, is called once the run knows which files it
	// reads and before it reads them, with their total size in bytes: all
	// of the input's files, or for a run that resumes a state only the
	// new ones (and, should that run then have to read every file, once
	// more with all of them). A caller may prepare memory for the run
	// with it (the armtally command advises the heap for huge pages). It
	// is not called for Arrow record streams.
	BeforeRead func(inputBytes int64)
}

// Result is what a run gives back.
type Result struct {
	// Readouts are in the order of the experiments.
	Readouts []experiment.Readout
	// Stats are the reader's counts: files, rows read, bad rows by
	// reason, rows left out by the event filter.
	Stats ingest.Stats
	// State says what a run with Options.State did with its state file;
	// nil without one.
	State    *StateReport
	talliers []tallier
}

// Units returns the per-unit records of experiment i in key order, for
// the audit table. The run must have had Options.KeepUnits; a counts
// table has no units.
func (r *Result) Units(i int) (iter.Seq[experiment.UnitRecord], error) {
	if i < 0 || i >= len(r.talliers) || r.talliers[i] == nil {
		return nil, fmt.Errorf("experiment %d: no units kept (run with Options.KeepUnits)", i)
	}
	switch tl := r.talliers[i].(type) {
	case *experiment.Tallier:
		units, err := tl.Units()
		if err != nil {
			return nil, &DataError{err}
		}
		return units, nil
	case *experiment.UnitTableTallier:
		return tl.Units(), nil
	}
	return nil, fmt.Errorf("its input has no units to audit")
}

// ConfigError is a run whose experiments or options do not fit together
// or with the input (no metrics, an exposure event differing between
// experiments, a memory limit on a table): nothing was read.
type ConfigError struct{ Err error }

func (e *ConfigError) Error() string { return e.Err.Error() }
func (e *ConfigError) Unwrap() error { return e.Err }

// DataError is an input that cannot be read, a malformed row, or data that
// contradicts the experiment (an arm that is not planned).
type DataError struct{ Err error }

func (e *DataError) Error() string { return e.Err.Error() }
func (e *DataError) Unwrap() error { return e.Err }

// SpillError is a failure to write or read the partition files of a run
// with a memory limit.
type SpillError struct{ Err error }

func (e *SpillError) Error() string { return e.Err.Error() }
func (e *SpillError) Unwrap() error { return e.Err }

// tallier is what the talliers of the three input shapes have in common.
type tallier interface {
	Add(arrow.RecordBatch) error
	Tally() (experiment.Tally, error)
}

// NewTallier returns the tallier of the input shape for spec; its error
// says why spec cannot be tallied.
func newTallier(shape experiment.InputShape, spec experiment.Spec) (tallier, error) {
	switch shape {
	case experiment.InputUnitTable:
		return experiment.NewUnitTableTallier(spec)
	case experiment.InputCounts:
		return experiment.NewCountsTallier(spec)
	}
	return experiment.NewTallier(spec)
}

// Check says whether spec can be tallied from the input shape, without
// reading anything: the checks a run makes before it opens the input.
func Check(shape experiment.InputShape, spec experiment.Spec) error {
	_, err := newTallier(shape, spec)
	return err
}

// recordReader is what the readers of every input have in common.
type recordReader interface {
	Schema() *arrow.Schema
	Next() bool
	RecordBatch() arrow.RecordBatch
	Err() error
	Stats() ingest.Stats
	Close() error
}

// Run reads the input once, tallies each experiment and analyses each
// tally. Cancelling ctx stops the run between record batches (and between
// the partitions of a spilled run), removes the files it created, and
// returns ctx's error.
func Run(ctx context.Context, in Input, exps []Experiment, opts Options) (*Result, error) {
	if len(exps) == 0 {
		return nil, &ConfigError{errors.New("no experiments to analyse")}
	}
	if err := checkOptions(in, exps, opts); err != nil {
		return nil, err
	}
	if opts.State != "" {
		return runWithState(ctx, in, exps, opts)
	}
	talliers, events, err := makeTalliers(in.Shape, exps)
	if err != nil {
		return nil, err
	}
	if in.Records == nil {
		// Listed once: the reader opens these sources, BeforeRead sizes
		// them and readInMemory reads their footers' rows.
		srcs, err := sources(in)
		if err != nil {
			return nil, err
		}
		in.Paths, in.FS, in.Sources = nil, nil, srcs
		if opts.BeforeRead != nil {
			opts.BeforeRead(sourceBytes(srcs))
		}
	}
	r, err := openReader(in, exps, events, opts.Workers, opts.MemoryLimit <= 0)
	if err != nil {
		return nil, err
	}
	defer r.Close()
	var (
		tallies []experiment.Tally
		rows    [][]experiment.NameCount // per experiment, the rows of each metric event
	)
	if opts.MemoryLimit > 0 {
		tallies, rows, err = readSpilled(ctx, r, exps, opts)
	} else {
		tallies, rows, err = readInMemory(ctx, r, in.Sources, talliers, opts, nil)
	}
	inv := &inventory{ctx: ctx, in: in, exps: exps, workers: opts.Workers}
	if sk := (*severalKeys)(nil); errors.As(err, &sk) {
		err = inv.severalKeys(sk.keys)
	}
	if err != nil {
		return nil, asDataError(err)
	}
	return analyse(in, inv, exps, tallies, rows, r.Stats(), talliers, opts)
}

// makeTalliers returns a tallier per experiment and, for an event log,
// the events they use.
func makeTalliers(shape experiment.InputShape, exps []Experiment) ([]tallier, []string, error) {
	talliers := make([]tallier, len(exps))
	var events []string // the events the experiments use (event logs only)
	for i, e := range exps {
		tl, err := newTallier(shape, e.Spec)
		if err != nil {
			return nil, nil, &ConfigError{err}
		}
		talliers[i] = tl
		if tl, ok := tl.(*experiment.Tallier); ok {
			for _, ev := range tl.Events() {
				if !slices.Contains(events, ev) {
					events = append(events, ev)
				}
			}
		}
	}
	return talliers, events, nil
}

// analyse checks each tally against the names the data holds (inv; rows
// holds, per experiment, the rows of each metric event, or nil to skip
// that check) and analyses it with the reader's counts st.
func analyse(in Input, inv *inventory, exps []Experiment, tallies []experiment.Tally, rows [][]experiment.NameCount, st ingest.Stats, talliers []tallier, opts Options) (*Result, error) {
	res := &Result{Readouts: make([]experiment.Readout, len(exps)), Stats: st}
	if opts.KeepUnits {
		res.talliers = talliers
	}
	for i, e := range exps {
		var r []experiment.NameCount
		if rows != nil {
			r = rows[i]
		}
		if err := inv.check(i, tallies[i], r); err != nil {
			return nil, asDataError(err)
		}
		o := e.Options
		o.RowsRead, o.BadRows = st.RowsRead, reasonCounts(st.BadRows)
		spec := e.Spec
		if keys := tallies[i].Diag.ExperimentKeys; spec.Key == "" && in.Shape == experiment.InputEventLog && len(keys) == 1 {
			// The one experiment of the log: the readout names it.
			spec.Key = keys[0]
		}
		var err error
		if res.Readouts[i], err = experiment.Analyze(spec, tallies[i], o); err != nil {
			return nil, &DataError{err}
		}
	}
	return res, nil
}

// asDataError wraps a *NotInDataError in a *DataError and returns any
// other error as it is.
func asDataError(err error) error {
	var nd *NotInDataError
	if errors.As(err, &nd) && !errors.As(err, new(*DataError)) {
		return &DataError{err}
	}
	return err
}

// runTalliers tallies the event log of in on top of the saved tallies of
// sf (when not nil), whose reader counts were saved, and analyses the
// tallies; it also returns the talliers, for the next state. A resumed run
// counts the rows of each metric event in the new files only, so it leaves
// the check that every metric event occurs to the full run that wrote the
// state (a changed definition forces a full run).
func runTalliers(ctx context.Context, in Input, exps []Experiment, opts Options, sf *stateFile, saved ingest.Stats, out *stateOut) (*Result, []*experiment.Tallier, error) {
	talliers, events, err := makeTalliers(in.Shape, exps)
	if err != nil {
		return nil, nil, err
	}
	tls := make([]*experiment.Tallier, len(talliers))
	for i, tl := range talliers {
		tls[i] = tl.(*experiment.Tallier)
		if sf != nil {
			if err := tls[i].ReadState(sf.sections[i]); err != nil {
				return nil, nil, err
			}
			tls[i].ExpectGrowth(sf.growth)
		}
	}
	var (
		st   ingest.Stats
		rows [][]experiment.NameCount
	)
	inv := &inventory{ctx: ctx, in: in, exps: exps, workers: opts.Workers}
	tallies := make([]experiment.Tally, len(exps))
	if len(in.Sources) > 0 {
		r, err := openReader(in, exps, events, opts.Workers, true)
		if err != nil {
			return nil, nil, err
		}
		defer r.Close()
		tallies, rows, err = readInMemory(ctx, r, in.Sources, talliers, opts, out)
		if sk := (*severalKeys)(nil); errors.As(err, &sk) {
			err = inv.severalKeys(sk.keys)
		}
		if err != nil {
			return nil, nil, asDataError(err)
		}
		st = r.Stats()
	} else {
		for i, tl := range tls {
			if err := out.write(tl); err != nil {
				return nil, nil, err
			}
			if tallies[i], err = tl.Tally(); err != nil {
				return nil, nil, &DataError{err}
			}
		}
	}
	if sf != nil {
		rows = nil
	}
	res, err := analyse(in, inv, exps, tallies, rows, ingest.MergeStats(saved, st), talliers, opts)
	return res, tls, err
}

// checkOptions rejects option sets that cannot work, before anything is
// opened.
func checkOptions(in Input, exps []Experiment, opts Options) error {
	n := 0
	for _, given := range []bool{len(in.Paths) > 0 || in.FS != nil, len(in.Sources) > 0, in.Records != nil} {
		if given {
			n++
		}
	}
	if n != 1 {
		return &ConfigError{errors.New("give exactly one input: paths, sources or an Arrow record stream")}
	}
	if in.Shape != experiment.InputEventLog {
		if len(exps) > 1 {
			return &ConfigError{fmt.Errorf("a %s holds one experiment, not %d", in.Shape, len(exps))}
		}
		if in.Records != nil {
			return &ConfigError{fmt.Errorf("an Arrow record stream is read as an event log, not a %s", in.Shape)}
		}
	}
	if opts.MemoryLimit > 0 {
		if in.Shape != experiment.InputEventLog {
			return &ConfigError{errors.New("a memory limit applies to event logs; a unit or counts table is tallied row by row already")}
		}
		if opts.KeepUnits {
			return &ConfigError{errors.New("a memory limit and the per-unit records together: the audit table lists every unit in key order, which needs them all in memory")}
		}
	}
	for _, e := range exps {
		if err := checkAllowed(in.Shape, e); err != nil {
			return err
		}
	}
	exposure := exps[0].Spec.ExposureEvent
	for _, e := range exps[1:] {
		if in.Shape == experiment.InputEventLog && e.Spec.ExposureEvent != exposure {
			return &ConfigError{fmt.Errorf("not supported yet: experiments with different exposure events in one run (%q and %q); run them separately", exposure, e.Spec.ExposureEvent)}
		}
	}
	return nil
}

// checkAllowed checks the experiment's AllowAbsentEvents: each is an
// event of one of its metrics, and the input is an event log.
func checkAllowed(shape experiment.InputShape, e Experiment) error {
	for _, ev := range e.AllowAbsentEvents {
		if shape != experiment.InputEventLog {
			return &ConfigError{fmt.Errorf("experiment %q: an absent event allowed (%q), but a %s has no events", e.Spec.Key, ev, shape)}
		}
		used := slices.ContainsFunc(e.Spec.Metrics, func(m experiment.Metric) bool { return slices.Contains(m.Events, ev) })
		if !used {
			return &ConfigError{fmt.Errorf("experiment %q: the absent event allowed, %q, is not an event of any of its metrics", e.Spec.Key, ev)}
		}
	}
	return nil
}

// readInMemory feeds every record batch to every tallier and tallies them;
// for the talliers of an event log it also returns the rows of each metric
// event (Tallier.MetricEventRows). With a state file (out), each tally's
// state is written before it is summed, in the same pass. srcs, when the
// caller has listed the reader's sources, serve to tell the talliers the
// share of the input read (Tallier.SetReadShare).
func readInMemory(ctx context.Context, r recordReader, srcs []ingest.Source, talliers []tallier, opts Options, out *stateOut) ([]experiment.Tally, [][]experiment.NameCount, error) {
	stop := startProgress(r, opts)
	defer stop()
	share := readShare(r, srcs)
	for r.Next() {
		if err := ctx.Err(); err != nil {
			return nil, nil, err
		}
		rec := r.RecordBatch()
		if share != nil {
			sh := share()
			for _, tl := range talliers {
				if tl, ok := tl.(*experiment.Tallier); ok {
					tl.SetReadShare(sh)
				}
			}
		}
		for _, tl := range talliers {
			if err := tl.Add(rec); err != nil {
				return nil, nil, &DataError{err}
			}
		}
	}
	stop()
	if err := r.Err(); err != nil {
		return nil, nil, &DataError{err}
	}
	st := r.Stats()
	tallies := make([]experiment.Tally, len(talliers))
	rows := make([][]experiment.NameCount, len(talliers))
	for i, tl := range talliers {
		if tl, ok := tl.(*experiment.Tallier); ok {
			if st.Filtered > 0 {
				tl.AddFiltered(st.Filtered, st.FilteredMaxTS)
			}
			if _, err := checkKeys(tl, nil); err != nil {
				return nil, nil, err
			}
			rows[i] = tl.MetricEventRows()
			if out != nil {
				if err := out.write(tl); err != nil {
					return nil, nil, err
				}
			}
		}
		t, err := tl.Tally()
		if err != nil {
			return nil, nil, &DataError{err}
		}
		tallies[i] = t
	}
	return tallies, rows, nil
}

// readShare returns a function that gives the share of the input that r
// has read, its rows read over the rows that the Parquet footers of srcs
// list, or nil when these are not known (a CSV source, sources not listed).
func readShare(r recordReader, srcs []ingest.Source) func() float64 {
	p, ok := r.(interface{ Progress() int64 })
	if !ok || len(srcs) == 0 {
		return nil
	}
	total, ok := ingest.MetadataRows(srcs)
	if !ok || total <= 0 {
		return nil
	}
	return func() float64 { return float64(p.Progress()) / float64(total) }
}

// startProgress calls opts.Progress when the reader can count as it goes.
func startProgress(r recordReader, opts Options) (stop func()) {
	p, ok := r.(interface{ Progress() int64 })
	if opts.Progress == nil || !ok {
		return func() {}
	}
	stopped := false
	s := opts.Progress(p.Progress)
	return func() {
		if !stopped {
			stopped = true
			s()
		}
	}
}

// reasonCounts converts the reader's bad-row counts (ingest owns the
// reasons) for the readout.
func reasonCounts(bad []ingest.BadRowCount) []experiment.ReasonCount {
	var out []experiment.ReasonCount
	for _, b := range bad {
		out = append(out, experiment.ReasonCount{Reason: b.Reason.String(), Count: b.Count})
	}
	return out
}
