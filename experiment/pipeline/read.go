package pipeline

import (
	"context"
	"fmt"
	"strings"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/ingest"
)

// sources resolves the input's files.
func sources(in Input) ([]ingest.Source, error) {
	if len(in.Sources) > 0 {
		return in.Sources, nil
	}
	var (
		srcs []ingest.Source
		err  error
	)
	if in.FS != nil {
		srcs, err = ingest.FSSources(in.FS, in.Paths...)
	} else {
		srcs, err = ingest.FileSources(in.Paths)
	}
	if err != nil {
		return nil, &DataError{err}
	}
	if len(srcs) == 0 {
		return nil, &DataError{fmt.Errorf("no .csv, .csv.gz, .parquet or .parq files in %s", strings.Join(in.Paths, ", "))}
	}
	return srcs, nil
}

// sourceBytes returns the total size of srcs, leaving out those that
// cannot be sized now (the reader reports them).
func sourceBytes(srcs []ingest.Source) int64 {
	var n int64
	for _, s := range srcs {
		if size, _, err := s.Stat(); err == nil {
			n += size
		}
	}
	return n
}

// openReader returns the reader of the input. For an event log, events
// lists the events the talliers use: the reader leaves out the rows of
// other events and counts them (see ingest.Options.Events). direct says
// that the batches go straight to the talliers (not to a spill): the
// reader of Parquet files then dictionary-encodes the event, experiment
// and arm columns (ingest.Options.DictionaryColumns), which the talliers
// read once per value.
func openReader(in Input, exps []Experiment, events []string, workers int, direct bool) (recordReader, error) {
	m := mappingOf(in)
	if in.Records != nil {
		name := in.RecordsName
		if name == "" {
			name = "arrow stream"
		}
		r, err := ingest.NewArrowReader(in.Records, name, eventOptions(in, m, exps, events, workers))
		if err != nil {
			return nil, &ConfigError{err}
		}
		return r, nil
	}
	srcs, err := sources(in)
	if err != nil {
		return nil, err
	}
	var r recordReader
	switch in.Shape {
	case experiment.InputUnitTable, experiment.InputCounts:
		r, err = openTable(in, m, exps[0], srcs)
	default:
		// The talliers and the spill copy what they keep of a batch,
		// so its buffers can serve the next batches (recycler).
		opts := eventOptions(in, m, exps, events, workers)
		opts.Allocator = new(recycler)
		opts.DictionaryColumns = direct && allParquet(srcs)
		r, err = ingest.NewReader(srcs, opts)
	}
	if err != nil {
		return nil, &ConfigError{err}
	}
	return r, nil
}

// allParquet reports whether every source is a Parquet file (and there is
// one): the CSV reader has no dictionary to take a value's code from, and
// would look each value up by its text instead.
func allParquet(srcs []ingest.Source) bool {
	for _, s := range srcs {
		if s.Format() != ingest.FormatParquet {
			return false
		}
	}
	return len(srcs) > 0
}

// mappingOf returns the input's column mapping: with none of User, TS,
// Event, Experiment and Arm set, the names of ingest.DefaultMapping.
func mappingOf(in Input) ingest.Mapping {
	m := in.Mapping
	if m.User == "" && m.TS == "" && m.Event == "" && m.Experiment == "" && m.Arm == "" {
		def := ingest.DefaultMapping()
		def.Segments, def.EpochUnit = m.Segments, m.EpochUnit
		m = def
	}
	return m
}

// eventOptions are the reader options of an event log.
func eventOptions(in Input, m ingest.Mapping, exps []Experiment, events []string, workers int) ingest.Options {
	// Planned arms are checked row by row, so that an exposure in an arm
	// that is not planned is a bad row (unknown_arm) named by file, row and
	// column, skipped and counted under an error budget. An experiment
	// without a key takes every exposure row: its arms are listed under
	// "", which ingest applies to any key.
	planned := map[string][]string{}
	for _, e := range exps {
		if len(e.Spec.Arms) > 0 {
			planned[e.Spec.Key] = e.Spec.Arms
		}
	}
	return ingest.Options{Mapping: m, ExposureEvent: exps[0].Spec.ExposureEvent, PlannedArms: planned,
		Delimiter: in.Delimiter, MaxBadRows: in.MaxBadRows, MaxBadShare: in.MaxBadShare, Events: events,
		Workers: workers}
}

// openTable returns the reader of a unit or counts table of experiment e.
func openTable(in Input, m ingest.Mapping, e Experiment, srcs []ingest.Source) (recordReader, error) {
	var segs []ingest.ColumnMap
	for _, s := range e.Spec.Segments {
		segs = append(segs, ingest.ColumnMap{Logical: s, Physical: s})
	}
	if in.Shape == experiment.InputUnitTable {
		cols := make([]ingest.ColumnMap, 0, len(e.Spec.Metrics))
		for _, mt := range e.Spec.Metrics {
			col := ingest.ColumnMap{Logical: mt.Name, Physical: mt.Name}
			for _, c := range e.MetricColumns {
				if c.Logical == mt.Name && c.Physical != "" {
					col.Physical = c.Physical
				}
			}
			cols = append(cols, col)
		}
		return ingest.NewUnitTableReader(srcs, ingest.UnitTableOptions{Unit: m.User, Arm: m.Arm, TS: in.UnitTS,
			EpochUnit: m.EpochUnit, Metrics: cols, Segments: segs})
	}
	o := in.Counts
	o.Arm, o.Segments = m.Arm, segs
	for _, mt := range e.Spec.Metrics {
		o.Metrics = append(o.Metrics, mt.Name)
	}
	return ingest.NewCountsReader(srcs, o)
}

// spillPartitions is the number of hash partitions of a run with a memory
// limit.
const spillPartitions = 64

// spillBytesPerRow is the memory a tally takes per row it reads, as the
// memory limit estimates it: analysing the 10M-unit benchmark log in
// memory peaked at 1.4 GB for 17M rows past the event filter, about 80
// bytes a row, rounded up for the collector's headroom.
const spillBytesPerRow = 100

// readSpilled writes the rows of an event log to disk in hash partitions
// of the units, then tallies them with tallySpilled. The partition files
// are removed before it returns.
func readSpilled(ctx context.Context, r recordReader, exps []Experiment, opts Options) ([]experiment.Tally, [][]experiment.NameCount, error) {
	spill, err := ingest.NewSpill(opts.SpillDir, spillPartitions, r.Schema())
	if err != nil {
		return nil, nil, &SpillError{err}
	}
	defer spill.Close()
	stop := startProgress(r, opts)
	defer stop()
	for r.Next() {
		if err := ctx.Err(); err != nil {
			return nil, nil, err
		}
		if err := spill.Add(r.RecordBatch()); err != nil {
			return nil, nil, &SpillError{err}
		}
	}
	stop()
	if err := r.Err(); err != nil {
		return nil, nil, &DataError{err}
	}
	return tallySpilled(ctx, exps, spill, r.Stats(), opts.MemoryLimit)
}

// tallySpilled tallies the rows of an event log spilled to disk: the
// partitions are taken in groups of about memoryLimit / spillBytesPerRow
// rows, each group tallied by fresh talliers that share the whole input's
// freshness, and the tallies of the groups merged, which is exact since a
// unit's rows are all in one partition (experiment.MergeTallies). st holds
// the reader's counts. It also returns the rows of each experiment's
// metric events (Tallier.MetricEventRows), summed over the groups.
func tallySpilled(ctx context.Context, exps []Experiment, spill *ingest.Spill, st ingest.Stats, memoryLimit int64) ([]experiment.Tally, [][]experiment.NameCount, error) {
	fresh, hasFresh := spill.MaxTS()
	if st.Filtered > 0 && (!hasFresh || st.FilteredMaxTS > fresh) {
		fresh, hasFresh = st.FilteredMaxTS, true
	}
	maxRows := max(1, memoryLimit/spillBytesPerRow)
	parts := make([][]experiment.Tally, len(exps))
	events := make([][]experiment.NameCount, len(exps))
	keys := make([][]string, len(exps))
	for p := 0; p < spill.Partitions(); {
		q, rows := p, int64(0)
		for q < spill.Partitions() && (q == p || rows+spill.Rows(q) <= maxRows) {
			rows += spill.Rows(q)
			q++
		}
		talliers := make([]*experiment.Tallier, len(exps))
		for i, e := range exps {
			tl, err := experiment.NewTallier(e.Spec)
			if err != nil {
				return nil, nil, &ConfigError{err}
			}
			talliers[i] = tl
		}
		for k := p; k < q; k++ {
			if err := addSpilled(ctx, spill, k, talliers); err != nil {
				return nil, nil, err
			}
		}
		for i, tl := range talliers {
			if p == 0 {
				tl.AddFiltered(st.Filtered, st.FilteredMaxTS)
			}
			if hasFresh {
				tl.SeeTime(fresh)
			}
			var err error
			if keys[i], err = checkKeys(tl, keys[i]); err != nil {
				return nil, nil, err
			}
			events[i] = addRows(events[i], tl)
			t, err := tl.Tally()
			if err != nil {
				return nil, nil, &DataError{err}
			}
			parts[i] = append(parts[i], t)
		}
		p = q
	}
	out := make([]experiment.Tally, len(exps))
	for i, e := range exps {
		t, err := experiment.MergeTallies(e.Spec, parts[i]...)
		if err != nil {
			return nil, nil, &DataError{err}
		}
		out[i] = t
	}
	return out, events, nil
}

// addSpilled feeds partition k of spill to the talliers.
func addSpilled(ctx context.Context, spill *ingest.Spill, k int, talliers []*experiment.Tallier) error {
	sr, err := spill.Reader(k, nil, 0)
	if err != nil {
		return &SpillError{err}
	}
	defer sr.Close()
	for sr.Next() {
		if err := ctx.Err(); err != nil {
			return err
		}
		for _, tl := range talliers {
			if err := tl.Add(sr.RecordBatch()); err != nil {
				return &DataError{err}
			}
		}
	}
	if err := sr.Err(); err != nil {
		return &SpillError{err}
	}
	return nil
}
