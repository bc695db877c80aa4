package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"runtime/debug"
	"slices"
	"strings"
	"time"

	"github.com/spf13/pflag"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/hugepage"
	"github.com/armtally/armtally/experiment/pipeline"
	"github.com/armtally/armtally/experiment/specfile"
	"github.com/armtally/armtally/experiment/warehouse"
	"github.com/armtally/armtally/ingest"
	"github.com/armtally/armtally/report"
	"github.com/armtally/armtally/sampledata"
)

const analyzeUsage = `Usage: armtally analyze [flags] FILE|FOLDER...
       armtally analyze --demo [flags]
       armtally analyze --spec FILE [flags] [FILE|FOLDER...]

Reads the event log in the named Parquet (.parquet, .parq) and CSV (.csv,
.csv.gz) files (a folder contributes every such file under it; a pattern
such as 'exports/dt=*/*.parquet' the files it matches; key=value folder
names can be mapped as columns) and writes a readout of one experiment:
Markdown to stdout (or --out), JSON to --json.

With --spec, a TOML spec file gives the input, the column mapping, the
outputs and one or more experiments; the log is read once and each
experiment gets its readout. Flags you give override the file. See
'armtally help spec'.

Each row is one event with the columns user, ts, event, experiment and arm
(rename them with the --*-col flags). A unit's first exposure inside the
analysis window decides its arm; a unit converts on a metric when one of the
metric's events follows its first exposure within the attribution window.

Tables (--input-shape): a unit table (units) has one row per unit with the
columns user, arm, optionally the exposure time (--ts-col) and one 0/1
column per metric, named by --metric NAME=COLUMN (NAME alone: the column
NAME); a counts table (counts) has one row per arm, segment values and
metric with the columns arm, metric, units, conversions and optionally
immature (rename them with --metric-col, --units-col, --conversions-col,
--immature-col), and --metric NAME names a value of its metric column.

Metrics (--metric, repeatable):
  NAME=EVENT[,EVENT...][:WINDOW][@TARGET]
  WINDOW is a number with a unit s, m, h, d or w (7d, 36h); none is unlimited.
  TARGET is a rate (0.12 or 12%) every arm is also tested against.

Guardrails (--guardrail, repeatable): a metric that must not get worse,
  NAME=EVENT[,EVENT...][:WINDOW]~MARGIN
  MARGIN is absolute in percentage points (0.5pp) or relative to the
  control's rate (5%). Each treatment is tested for non-inferiority; mark
  metrics where lower is better (unsubscribes, refunds) with --lower-is-better.

Secondary metrics (--secondary-metric, repeatable, as --metric) inform but
never decide. Every --metric is primary: the primary metrics' comparisons of
each treatment with the control form the confirmatory family, adjusted with
--adjust (Holm by default); the secondary metrics' comparisons are adjusted
in a family of their own by the same method; guardrails stay outside both.

The window is the part after the last colon (page:view:7d is the event
page:view); an event that also ends in a window (signup:1d:2d) is refused
as ambiguous. Names the log does not hold stop the run with exit 3 and a
list of what it holds, with counts and a close name: an experiment key
(--experiment), the exposure event, the control or a planned arm (--arms),
an event of a metric or guardrail (allow a genuinely rare one with
--allow-absent-event EVENT). Without --experiment, a log whose exposure
rows carry one key is analysed under it (said on stderr); several keys
stop the run with their list.

Nightly monitoring: --sequential METRIC=obf|pocock|mixture adds a test that
stays valid however often the experiment is read (obf and pocock need
--planned-units); --history FILE keeps each night's look in SQLite, and the
sequential tests read the earlier ones; --as-of INSTANT reruns a past night
(later rows ignored, the instant the analysis end); --max-staleness and
--exit-on-boundary give the exit codes 9 and 8. A spec file can hold them
all but --as-of (experiment.metric.sequential, experiment.planned_units,
experiment.mixing_variance, output.history, ...: see 'armtally help spec').

Examples:
  armtally analyze --demo
  armtally analyze --demo --json readout.json --out readout.md
  armtally analyze --demo --out readout.md --brief ticket-comment.md
  armtally analyze events.parquet --experiment checkout-flow-2026 --metric purchase=purchase:7d
  armtally analyze exports/ --experiment search-ranking --exposure-event assigned --control baseline --arms baseline,fresh-ranker --split 80,20 --start 2026-11-01 --end 2026-11-29 --metric signup=account_created:3d@10% --alpha 0.01
  armtally analyze events.parquet --experiment checkout-flow-2026 --metric purchase=purchase:7d --guardrail unsubscribe=newsletter_unsubscribe:7d~0.2pp --lower-is-better unsubscribe --adjust bonferroni
  armtally analyze events.csv --user-col visitor_id --ts-col event_time --metric buy=order_placed,order_paid:14d --fail-on-sample-ratio
  armtally analyze --spec experiments.toml
  armtally analyze --spec experiments.toml --experiment search-ranking --alpha 0.01 exports/dt=2026-11-30/
  armtally analyze exports/ --delimiter tab --max-bad-share 0.001 --metric purchase=purchase:7d
  armtally analyze units.csv --input-shape units --user-col visitor_id --ts-col exposed_at --metric purchase=purchased_flag:7d
  armtally analyze arm_counts.csv --input-shape counts --units-col n --conversions-col converted --metric purchase --metric signup
  armtally analyze exports/ --experiment checkout-flow-2026 --metric purchase=purchase:7d --sequential purchase=obf --planned-units 15000 --history looks.db --max-staleness 36h --exit-on-boundary
  armtally analyze events.parquet --experiment checkout-flow-2026 --metric purchase=purchase:7d --sequential mixture --history looks.db --as-of 2026-11-05

Flags:
`

// analyzeFlags holds the values of the analyze flags.
type analyzeFlags struct {
	demo     bool
	mapping  *mappingFlags
	tables   *tableFlags
	segments []string
	// exp holds the flags of one experiment's settings.
	exp                   specfile.Overrides
	lowerIsBetter         []string
	allowAbsent           []string
	out, jsonOut          string
	brief                 string
	failOnSampleRatio     bool
	failOnGuardrail       bool
	exitOnDecision        bool
	spec                  string
	delimiter             string
	maxBadRows            int64
	maxBadShare           float64
	audit                 string
	chart                 string
	noProgress            bool
	memoryLimit, spillDir string
	state                 string
	maxSpecSize           string
	warehouse             warehouseFlags
	monitor               *monitorFlags
}

func newAnalyzeFlagSet(f *analyzeFlags, stderr io.Writer) *pflag.FlagSet {
	fs := pflag.NewFlagSet("analyze", pflag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.SortFlags = false
	fs.StringVar(&f.spec, "spec", "", "read the input, column mapping, outputs and experiments from this TOML spec file (see armtally help spec); flags you give override it")
	fs.BoolVar(&f.demo, "demo", false, "analyse the embedded demo event log (its experiment, metrics and window are the defaults)")
	fs.StringVar(&f.exp.Shape, "input-shape", "events", "how the input's rows are laid out: events (one row per event), units (one row per unit: unit, arm, optional exposure time (--ts-col), one 0/1 column per metric, --metric NAME=COLUMN) or counts (one row per arm, segment values and metric: arm, metric, units, conversions; --metric NAME)")
	fs.StringVar(&f.exp.Experiment, "experiment", "", "experiment key on exposure rows (required when the log holds several experiments; with one, it is used); with --spec, run only the file's experiment of this key")
	fs.StringVar(&f.exp.ExposureEvent, "exposure-event", "exposure", "event name of exposure rows")
	fs.StringVar(&f.exp.Control, "control", "control", "name of the control arm")
	fs.StringSliceVar(&f.exp.Arms, "arms", nil, "planned arms, comma-separated (the control is added first when missing); any other arm in the data is an error")
	fs.StringVar(&f.exp.Split, "split", "", "planned traffic shares of --arms, comma-separated (50,25,25); default equal")
	fs.StringArrayVar(&f.exp.Metrics, "metric", nil, "conversion metric NAME=EVENT[,EVENT...][:WINDOW][@TARGET] (repeatable)")
	fs.StringArrayVar(&f.exp.Secondary, "secondary-metric", nil, "secondary conversion metric, as --metric: compared in a family of its own, never deciding (repeatable)")
	fs.StringArrayVar(&f.exp.Guardrails, "guardrail", nil, "guardrail metric NAME=EVENT[,EVENT...][:WINDOW]~MARGIN, MARGIN 0.5pp (absolute) or 5% (of the control's rate) (repeatable)")
	fs.StringArrayVar(&f.lowerIsBetter, "lower-is-better", nil, "metric where a lower rate is the good outcome (repeatable)")
	fs.StringArrayVar(&f.allowAbsent, "allow-absent-event", nil, "event of a metric that may occur in no row of the log, for a genuinely rare event; without it such an event stops the run (exit 3) with the event names the log holds (repeatable)")
	fs.StringVar(&f.exp.Start, "start", "", "start of the analysis window, inclusive (RFC 3339 or YYYY-MM-DD); default: all data")
	fs.StringVar(&f.exp.End, "end", "", "end of the analysis window, exclusive; default: no end (maturity is judged against the latest event)")
	fs.StringVar(&f.exp.MultiArm, "multi-arm", "exclude", "units exposed to several arms: exclude, or first (keep the first exposure's arm)")
	fs.StringVar(&f.exp.Maturity, "maturity", "exclude", "units whose attribution window has not closed: exclude or include")
	fs.Float64Var(&f.exp.Alpha, "alpha", 0.05, "significance level of every test; intervals are at 1 - alpha")
	fs.StringVar(&f.exp.Alternative, "alternative", "two-sided", "alternative hypothesis: two-sided, greater (treatment higher) or less; intervals are at 1 - 2 alpha for one-sided tests")
	fs.StringVar(&f.exp.Adjust, "adjust", "holm", "multiple-comparison adjustment over treatments x primary metrics (and, apart, x secondary metrics): holm, bonferroni, hochberg, bh, by or none")
	fs.StringVar(&f.exp.Interval, "interval", experiment.IntervalWilson.String(), "interval of each arm's rate: wilson, clopper-pearson, agresti-coull or wald")
	fs.StringVar(&f.exp.DifferenceInterval, "difference-interval", experiment.DifferenceNewcombe.String(), "interval of each difference: newcombe or wald")
	fs.StringVar(&f.exp.NonInferiorityMethod, "non-inferiority-method", "farrington-manning", "variance of guardrail tests: farrington-manning, miettinen-nurminen or wald")
	fs.Int64Var(&f.exp.MinCount, "min-count", 5, "conversions and non-conversions per arm needed to trust the normal approximation")
	fs.Float64Var(&f.exp.SampleRatioThreshold, "sample-ratio-threshold", experiment.DefaultSampleRatioThreshold, "p-value below which the sample ratio check fails")
	fs.StringVarP(&f.out, "out", "o", "", "write the Markdown readout to this file instead of stdout (- for stdout)")
	fs.StringVar(&f.jsonOut, "json", "", "also write the JSON readout to this file (- for stdout, with --out FILE)")
	fs.StringVar(&f.brief, "brief", "", "also write the compact Markdown readout for a ticket comment (summary, warnings, cautions) to this file")
	fs.StringVar(&f.audit, "audit", "", "also write the per-unit audit table (Parquet) to this file; with several experiments, one file each, named FILE-KEY.parquet")
	fs.StringVar(&f.chart, "chart", "", "also write a chart of each treatment's difference from the control with its interval, per metric, to this file: SVG, or PNG when FILE ends in .png; linked from the Markdown readout; with several experiments, one file each, named FILE-KEY.svg")
	fs.BoolVar(&f.failOnSampleRatio, "fail-on-sample-ratio", false, "exit with code 4 when the sample ratio check fails")
	fs.BoolVar(&f.failOnGuardrail, "fail-on-guardrail", false, "exit with code 5 when a guardrail is not held for a treatment (not shown within its margin, worse, or not readable)")
	fs.BoolVar(&f.exitOnDecision, "exit-on-decision", false, "exit with code 6 when the decision is ship and 7 when it is stop (wait and fix_data exit 0)")
	fs.StringVar(&f.memoryLimit, "memory-limit", "", "keep the per-unit state of an event log under about this size (such as 800MB or 2GiB): the rows go to disk in hash partitions of the units, tallied a group at a time and merged; no --audit")
	fs.StringVar(&f.spillDir, "spill-dir", "", "folder for the partition files of --memory-limit (default: the system's temporary folder)")
	fs.StringVar(&f.state, "state", "", "keep the tally of an event log in this state file: the next run with it reads only the files not read before and gives the readout of reading them all; it reads every file again, and says why, when one read before changed or is gone, the run's definition changed, or new rows are older than the state can take")
	fs.BoolVar(&f.noProgress, "no-progress", false, "do not show the rows read, rate and elapsed time on stderr while reading (shown only when stderr is a terminal, and not for unit or counts tables)")
	f.mapping = defineMappingFlags(fs)
	f.tables = defineTableFlags(fs)
	f.monitor = defineMonitorFlags(fs)
	fs.StringArrayVar(&f.segments, "segment", nil, "column to break every metric down by (read from each unit's first exposure row); exploratory results (repeatable)")
	fs.StringVar(&f.maxSpecSize, "max-spec-size", "4MiB", "largest --spec file to read (such as 16MiB); a larger one is refused before it is read")
	fs.Int64Var(&f.exp.MaxSegmentValues, "max-segment-values", experiment.DefaultMaxSegmentValues, "most distinct values (null counts as one) a segment column may have, 1 to 100000; more stops the run with an error")
	fs.StringVar(&f.delimiter, "delimiter", ",", "field separator of CSV files: one character; tab or \\t for a tab")
	fs.Int64Var(&f.maxBadRows, "max-bad-rows", 0, "skip and count up to this many bad rows (-1: any number); 0 stops at the first")
	fs.Float64Var(&f.maxBadShare, "max-bad-share", 0, "skip and count bad rows up to this share of the rows read (0.001); checked at the end")
	defineWarehouseFlags(fs, &f.warehouse)
	return fs
}

// analyzeRun is what one analyze run does: read the sources once with the
// mapping, tally and analyse each experiment, and write the readouts.
type analyzeRun struct {
	sources []ingest.Source
	// shape is input.shape: events, units or counts.
	shape   experiment.InputShape
	mapping ingest.Mapping
	// tsMapped says whether the ts column was named (by the spec file or
	// --ts-col): a unit table's exposure time column is optional.
	tsMapped bool
	// counts names the columns of a counts table.
	counts      ingest.CountsOptions
	delimiter   rune
	maxBadRows  int64
	maxBadShare float64
	experiments []builtExperiment
	// out, jsonOut and audit are the output paths ("" for none; "-" is
	// standard output for out and jsonOut); outFrom says where each was
	// named: "--out", "--json", "--audit" or the spec file's key.
	out, jsonOut string
	audit        string
	outFrom      [3]string
	// brief is the path of the compact Markdown readout ("" for none),
	// named by --brief.
	brief string
	// chart is the --chart file ("" for none).
	chart string
	// checks are the opt-in exit codes: --fail-on-sample-ratio (or the
	// spec file's output.fail_on_sample_ratio), --fail-on-guardrail and
	// --exit-on-decision.
	checks outcomeChecks
	// progress says whether to show a progress line on stderr while
	// reading: stderr is a terminal and --no-progress is not given.
	progress bool
	// stderr is where the progress line goes.
	stderr io.Writer
	// memoryLimit, when positive, makes analyze spill the rows of an
	// event log to spillDir and tally them a group of partitions at a
	// time (see analyzeSpilled).
	memoryLimit int64
	spillDir    string
	// postgres and query, when set, make the run read a PostgreSQL
	// table with the query instead of files (warehouse.go).
	postgres string
	query    *warehouse.Query
	// monitor is the nightly monitoring of --sequential, --history,
	// --as-of and --max-staleness (monitor.go).
	monitor *monitorRun
	// state is the state file of an incremental run (--state), or "".
	state string
}

// builtExperiment is one experiment of a run, checked.
type builtExperiment struct {
	spec experiment.Spec
	opts experiment.AnalysisOptions
	// metricColumns maps each metric to its column of a unit table.
	metricColumns []ingest.ColumnMap
	// allowAbsent lists the events that may occur in no row.
	allowAbsent []string
	// monitoring is the spec file's monitoring settings of the
	// experiment (empty without a file).
	monitoring specfile.Monitoring
}

// parseAnalyze parses the analyze command line, and the spec file it
// names, into a run. Flags the user set override the spec file's values.
func parseAnalyze(args []string, stdout, stderr io.Writer) (*analyzeRun, error) {
	run, err := parseAnalyzeRun(args, stdout, stderr)
	var fe *specfile.FlagError
	if errors.As(err, &fe) {
		return nil, usagef("analyze: %s", fe.Msg)
	}
	return run, err
}

// parseAnalyzeRun is parseAnalyze, with the problems of flag values
// returned as the specfile package words them.
func parseAnalyzeRun(args []string, stdout, stderr io.Writer) (*analyzeRun, error) {
	var f analyzeFlags
	fs := newAnalyzeFlagSet(&f, stderr)
	if err := parseFlags(fs, args, analyzeUsage, stdout); err != nil {
		return nil, err
	}
	f.exp.Given = fs.Changed
	sf, err := readSpec(f.spec, f.maxSpecSize)
	if err != nil {
		return nil, err
	}
	run := &analyzeRun{stderr: stderr, progress: !f.noProgress && isTerminal(stderr)}
	if err := applyShape(fs, &f, sf, run); err != nil {
		return nil, err
	}
	exps, err := analyzeExperiments(fs, &f, sf)
	if err != nil {
		return nil, err
	}
	for _, e := range exps {
		spec, opts, err := e.Build()
		if err != nil {
			return nil, err
		}
		run.experiments = append(run.experiments, builtExperiment{spec: spec, opts: opts, metricColumns: e.MetricColumns(),
			allowAbsent: e.AllowAbsentEvents(), monitoring: e.Monitoring()})
	}
	// Flags the user set override the file's values; without a file,
	// every flag applies.
	override := func(name string) bool { return sf == nil || fs.Changed(name) }
	if err := applyMapping(fs, &f, sf, override, run); err != nil {
		return nil, err
	}
	if err := applyReading(&f, sf, override, run); err != nil {
		return nil, err
	}
	if err := checkTableReading(run); err != nil {
		return nil, err
	}
	if err := applyOutputs(&f, sf, override, run); err != nil {
		return nil, err
	}
	if run.monitor, err = applyMonitor(specMonitorFlags(f.monitor, sf, override), run); err != nil {
		return nil, err
	}
	if err := applyMemoryLimit(&f, run); err != nil {
		return nil, err
	}
	run.state = f.state
	if ok, err := applyWarehouse(fs, &f, run); ok || err != nil {
		return run, err
	}
	if run.sources, err = analyzeSources(fs, &f, sf); err != nil {
		return nil, err
	}
	if sf != nil {
		if err := sf.CheckPartitions(run.sources); err != nil {
			return nil, &dataError{err}
		}
	}
	var inputs []string
	if !f.demo {
		for _, src := range run.sources {
			inputs = append(inputs, src.Name)
		}
	}
	if f.spec != "" {
		inputs = append(inputs, f.spec)
	}
	if err := checkOutputs(run, inputs); err != nil {
		return nil, err
	}
	if !f.demo {
		if err := checkOutsideInputFolders(outputFiles(run), inputRoots(fs, sf)); err != nil {
			return nil, err
		}
	}
	return run, nil
}

// readSpec reads the spec file of --spec, if any, and refuses the keys
// whose feature armtally does not have yet.
func readSpec(path, maxSize string) (*specfile.File, error) {
	limit, err := parseBytes(maxSize)
	if err != nil {
		return nil, usagef("analyze: --max-spec-size: %v", err)
	}
	if path == "" {
		return nil, nil
	}
	sf, err := specfile.ReadLimit(path, limit)
	if pe := (*os.PathError)(nil); errors.As(err, &pe) {
		return nil, usagef("analyze: --spec: %v", err)
	}
	if err != nil {
		return nil, err
	}
	if err := sf.Unsupported(); err != nil {
		return nil, err
	}
	return sf, nil
}

// analyzeExperiments returns the experiments of the run: the spec file's
// (those --experiment picks) with the flags the user set applied, or one
// made from the flags alone.
func analyzeExperiments(fs *pflag.FlagSet, f *analyzeFlags, sf *specfile.File) ([]*specfile.Settings, error) {
	var exps []*specfile.Settings
	if sf == nil || len(sf.Experiments) == 0 {
		if f.demo {
			demoDefaults(fs, f)
		}
		e := specfile.NewSettings()
		if err := f.exp.Apply(e, true); err != nil {
			return nil, err
		}
		exps = append(exps, e)
	} else {
		var err error
		if exps, err = pickExperiments(fs, f, sf); err != nil {
			return nil, err
		}
		for _, e := range exps {
			if err := f.exp.Apply(e, false); err != nil {
				return nil, err
			}
		}
	}
	// --lower-is-better marks the metrics of that name; --allow-absent-event
	// lets the event occur in no row, in every experiment that counts it.
	if err := applyToAll("lower-is-better", f.lowerIsBetter, exps, (*specfile.Settings).MarkLowerIsBetter, "no metric of that name"); err != nil {
		return nil, err
	}
	if err := applyToAll("allow-absent-event", f.allowAbsent, exps, (*specfile.Settings).AllowAbsentEvent, "no metric or guardrail counts that event"); err != nil {
		return nil, err
	}
	for _, name := range f.segments {
		if name = strings.TrimSpace(name); name == "" {
			return nil, usagef("analyze: --segment: empty column name")
		}
		for _, e := range exps {
			e.AddSegment(name)
		}
	}
	return exps, nil
}

// pickExperiments returns the spec file's experiment that --experiment
// names, or all of them; --arms and --split need one.
func pickExperiments(fs *pflag.FlagSet, f *analyzeFlags, sf *specfile.File) ([]*specfile.Settings, error) {
	exps := sf.Experiments
	if fs.Changed("experiment") {
		exps = nil
		var keys []string
		for _, e := range sf.Experiments {
			keys = append(keys, e.Key())
			if e.Key() == f.exp.Experiment {
				exps = append(exps, e)
			}
		}
		if len(exps) == 0 {
			return nil, usagef("analyze: --experiment %q: %s has no such experiment (it has %s)", f.exp.Experiment, sf.Name, strings.Join(keys, ", "))
		}
	}
	if len(exps) > 1 {
		for _, name := range []string{"arms", "split"} {
			if fs.Changed(name) {
				return nil, usagef("analyze: --%s applies to one experiment, and %s has %d: choose one with --experiment", name, sf.Name, len(exps))
			}
		}
	}
	return exps, nil
}

// applyMapping sets the run's column mapping: the spec file's, then the
// flags.
func applyMapping(fs *pflag.FlagSet, f *analyzeFlags, sf *specfile.File, override func(string) bool, run *analyzeRun) error {
	run.mapping = ingest.DefaultMapping()
	if sf != nil {
		run.mapping = sf.Mapping
	}
	if err := f.mapping.apply(&run.mapping, sf == nil, "analyze"); err != nil {
		return err
	}
	for _, name := range f.segments {
		if name = strings.TrimSpace(name); !slices.Contains(run.mapping.Segments, name) {
			run.mapping.Segments = append(run.mapping.Segments, name)
		}
	}
	run.tsMapped = fs.Changed("ts-col") || sf != nil && sf.TSMapped
	return nil
}

// applyReading sets the delimiter and the bad-row budget: the spec file's,
// then the flags.
func applyReading(f *analyzeFlags, sf *specfile.File, override func(string) bool, run *analyzeRun) error {
	if sf != nil {
		run.delimiter, run.maxBadRows, run.maxBadShare = sf.Delimiter, sf.MaxBadRows, sf.MaxBadShare
	}
	if override("delimiter") {
		d, err := specfile.ParseDelimiter(f.delimiter)
		if err != nil {
			return usagef("analyze: --delimiter: %v", err)
		}
		run.delimiter = d
	}
	if override("max-bad-rows") {
		if f.maxBadRows < ingest.NoLimit {
			return usagef("analyze: --max-bad-rows %d: want 0 or more, or -1 for no limit", f.maxBadRows)
		}
		run.maxBadRows = f.maxBadRows
	}
	if override("max-bad-share") {
		if !(f.maxBadShare >= 0 && f.maxBadShare <= 1) {
			return usagef("analyze: --max-bad-share %v: want a share from 0 to 1", f.maxBadShare)
		}
		run.maxBadShare = f.maxBadShare
	}
	return nil
}

// applyOutputs sets the outputs: the spec file's, then the flags. Each
// output remembers where it was named (the flag, or the spec file's key),
// for the messages of checkOutputs.
func applyOutputs(f *analyzeFlags, sf *specfile.File, override func(string) bool, run *analyzeRun) error {
	if sf != nil {
		run.out, run.jsonOut, run.audit = sf.Markdown, sf.JSON, sf.Audit
		run.outFrom = [3]string{"output.markdown in " + sf.Name, "output.json in " + sf.Name, "output.audit in " + sf.Name}
		if sf.FailOnSampleRatio != nil {
			run.checks.sampleRatio = *sf.FailOnSampleRatio
		}
	}
	for i, o := range []struct {
		flag string
		v    string
		dst  *string
	}{{"out", f.out, &run.out}, {"json", f.jsonOut, &run.jsonOut}, {"audit", f.audit, &run.audit}} {
		if override(o.flag) {
			*o.dst = o.v
			run.outFrom[i] = "--" + o.flag
		}
	}
	run.chart = f.chart
	if run.audit != "" && run.shape == experiment.InputCounts {
		return usagef("analyze: an audit table lists units, and a counts table has none (output.audit or --audit)")
	}
	if override("fail-on-sample-ratio") {
		run.checks.sampleRatio = f.failOnSampleRatio
	}
	if override("brief") {
		run.brief = f.brief
	}
	run.checks.guardrail, run.checks.decision = f.failOnGuardrail, f.exitOnDecision
	return nil
}

// applyMemoryLimit sets --memory-limit and --spill-dir.
func applyMemoryLimit(f *analyzeFlags, run *analyzeRun) error {
	run.spillDir = f.spillDir
	if f.memoryLimit == "" {
		if f.spillDir != "" {
			return usagef("analyze: --spill-dir %s without --memory-limit: nothing is spilled to disk unless --memory-limit is given", f.spillDir)
		}
		return nil
	}
	n, err := parseBytes(f.memoryLimit)
	if err != nil {
		return usagef("analyze: --memory-limit: %v", err)
	}
	if run.shape != experiment.InputEventLog {
		return usagef("analyze: --memory-limit applies to event logs; a unit or counts table is tallied row by row already")
	}
	if run.audit != "" {
		return usagef("analyze: --memory-limit and --audit together: the audit table lists every unit in key order, which needs them all in memory")
	}
	run.memoryLimit = n
	return nil
}

// analyzeSources returns the run's sources: --demo, the arguments, or the
// spec file's input.paths.
func analyzeSources(fs *pflag.FlagSet, f *analyzeFlags, sf *specfile.File) ([]ingest.Source, error) {
	if f.demo {
		if fs.NArg() > 0 {
			return nil, usagef("analyze: --demo takes no input files (got %s)", strings.Join(fs.Args(), " "))
		}
		name, data := sampledata.Demo()
		return []ingest.Source{ingest.BytesSource(name, data)}, nil
	}
	paths := fs.Args()
	if len(paths) == 0 && sf != nil && len(sf.Paths) > 0 {
		sources, err := sf.Sources()
		if err != nil {
			return nil, &dataError{err}
		}
		return sources, nil
	}
	if len(paths) == 0 {
		if sf != nil {
			return nil, usagef("analyze: name at least one input file or folder, in %s (input.paths) or on the command line", sf.Name)
		}
		return nil, usagef("analyze: name at least one input file or folder, or use --demo")
	}
	sources, err := ingest.FileSources(paths)
	if err != nil {
		return nil, &dataError{err}
	}
	if len(sources) == 0 {
		return nil, &dataError{fmt.Errorf("no .csv, .csv.gz, .parquet or .parq files in %s", strings.Join(paths, ", "))}
	}
	return sources, nil
}

// applyToAll applies each name of the repeatable flag to every experiment
// with apply, which reports whether the experiment has what the name
// names; a name no experiment has is an error that says why.
func applyToAll(flag string, names []string, exps []*specfile.Settings, apply func(*specfile.Settings, string) bool, why string) error {
	for _, name := range names {
		found := false
		for _, e := range exps {
			found = apply(e, name) || found
		}
		if !found {
			return usagef("analyze: --%s %q: %s", flag, name, why)
		}
	}
	return nil
}

// demoDefaults sets the flags the user left alone to the demo's settings.
func demoDefaults(fs *pflag.FlagSet, f *analyzeFlags) {
	d := sampledata.DemoSpec()
	set := func(name string, apply func()) {
		if !fs.Changed(name) {
			apply()
		}
	}
	set("experiment", func() { f.exp.Experiment = d.Experiment })
	set("exposure-event", func() { f.exp.ExposureEvent = d.ExposureEvent })
	set("control", func() { f.exp.Control = d.Control })
	set("arms", func() {
		f.exp.Arms = nil
		for _, a := range d.Arms {
			f.exp.Arms = append(f.exp.Arms, a.Name)
		}
	})
	set("start", func() { f.exp.Start = d.Start.Format(time.RFC3339) })
	set("end", func() { f.exp.End = d.End.Format(time.RFC3339) })
	set("metric", func() {
		f.exp.Metrics = nil
		for _, m := range d.Metrics {
			f.exp.Metrics = append(f.exp.Metrics, fmt.Sprintf("%s=%s:%dh", m.Event, m.Event, int64(m.Window/time.Hour)))
		}
	})
}

// runAnalyze runs analyze: the command line is checked (the output paths
// too) before any input is read; SIGINT and SIGTERM stop the run, remove
// its temporary files and replace no output.
func runAnalyze(args []string, stdout, stderr io.Writer) error {
	run, err := parseAnalyze(args, stdout, stderr)
	if err != nil {
		return err
	}
	ctx, stop := notifySignals(context.Background())
	defer stop()
	if run.memoryLimit > 0 {
		removeStaleSpills(run.spillDir, stderr)
	}
	var res *pipeline.Result
	if run.query != nil {
		res, err = analyzePostgres(ctx, run)
	} else {
		res, err = analyze(ctx, run)
	}
	if err != nil {
		return err
	}
	noteKeys(run, res.Readouts, stderr)
	if err := monitorLooks(ctx, run.monitor, res); err != nil {
		return err
	}
	if err := writeOutputs(ctx, run, res, stdout); err != nil {
		return err
	}
	return monitorOutcome(run.monitor, run.checks, res.Readouts)
}

// noteKeys says on stderr which experiment a run without a key analysed:
// the one key on the log's exposure rows.
func noteKeys(run *analyzeRun, readouts []experiment.Readout, stderr io.Writer) {
	for i, e := range run.experiments {
		if e.spec.Key == "" && i < len(readouts) && readouts[i].Experiment != "" {
			fmt.Fprintf(stderr, "armtally: no experiment key given; the log's exposure rows carry one, %q: analysing it\n", readouts[i].Experiment)
		}
	}
}

// writeOutputs writes the readouts and audit tables of a run: the files
// to temporary files first, all renamed into place only when every one is
// complete, then what goes to standard output.
func writeOutputs(ctx context.Context, run *analyzeRun, res *pipeline.Result, stdout io.Writer) error {
	set := report.NewOutputSet(ctx)
	defer set.Abort()
	readouts := res.Readouts
	jsonOut := func(w io.Writer) error { return report.WriteJSON(w, readouts) }
	md := func(w io.Writer) error {
		return report.WriteMarkdown(w, readouts, report.MarkdownOptions{ChartPath: chartLinkPath(run),
			LooksChartPath: looksChartLink(run.monitor, run.out)})
	}
	err := addOutputs(set, run, res, jsonOut, md)
	if err == nil {
		err = set.Commit()
	}
	if sig := interrupted(ctx); err != nil && sig != nil {
		return fmt.Errorf("analyze: interrupted by %w while writing the outputs; no output was replaced and the temporary files were removed", sig)
	}
	if err != nil {
		return err
	}
	if run.jsonOut == "-" {
		if err := jsonOut(stdout); err != nil {
			return fmt.Errorf("writing the JSON readout: %w", err)
		}
	}
	if run.out == "" || run.out == "-" {
		if err := md(stdout); err != nil {
			return fmt.Errorf("writing the Markdown readout: %w", err)
		}
	}
	return nil
}

// addOutputs adds the output files of a run to set.
func addOutputs(set *report.OutputSet, run *analyzeRun, res *pipeline.Result, jsonOut, md func(io.Writer) error) error {
	if run.jsonOut != "" && run.jsonOut != "-" {
		if err := set.Add(run.jsonOut, jsonOut); err != nil {
			return fmt.Errorf("writing the JSON readout: %w", err)
		}
	}
	if run.out != "" && run.out != "-" {
		if err := set.Add(run.out, md); err != nil {
			return fmt.Errorf("writing the Markdown readout: %w", err)
		}
	}
	if run.brief != "" {
		readouts := res.Readouts
		brief := func(w io.Writer) error {
			return report.WriteMarkdown(w, readouts, report.MarkdownOptions{Brief: true})
		}
		if err := set.Add(run.brief, brief); err != nil {
			return fmt.Errorf("writing the brief Markdown readout: %w", err)
		}
	}
	if err := writeCharts(set, run, res.Readouts); err != nil {
		return err
	}
	if err := writeLooksCharts(set, run.monitor, res.Readouts); err != nil {
		return err
	}
	if run.audit != "" {
		return writeAudits(set, run, res)
	}
	return nil
}

// pipelineInput returns the run's input and experiments as the pipeline
// takes them.
func pipelineInput(run *analyzeRun) (pipeline.Input, []pipeline.Experiment) {
	in := pipeline.Input{Sources: run.sources, Mapping: run.mapping, Counts: run.counts, Delimiter: run.delimiter,
		MaxBadRows: run.maxBadRows, MaxBadShare: run.maxBadShare}
	in.Shape = run.shape
	if run.shape == experiment.InputUnitTable && run.tsMapped {
		in.UnitTS = run.mapping.TS
	}
	exps := make([]pipeline.Experiment, len(run.experiments))
	for i, e := range run.experiments {
		exps[i] = pipeline.Experiment{Spec: e.spec, Options: e.opts, MetricColumns: e.metricColumns,
			AllowAbsentEvents: e.allowAbsent}
	}
	return in, exps
}

// analyze runs the pipeline over the run's input and experiments.
func analyze(ctx context.Context, run *analyzeRun) (*pipeline.Result, error) {
	in, exps := pipelineInput(run)
	opts := pipeline.Options{MemoryLimit: run.memoryLimit, SpillDir: run.spillDir, KeepUnits: run.audit != "", State: run.state}
	if run.progress && run.stderr != nil {
		opts.Progress = func(rows func() int64) func() {
			return startProgress(run.stderr, rows, progressInterval, time.Now)
		}
	}
	if run.memoryLimit > 0 {
		// The collector's soft limit, so that it works harder as the
		// heap nears the limit rather than letting garbage pile up.
		debug.SetMemoryLimit(run.memoryLimit)
	} else {
		// Sized from the files the run reads: a night that resumes a
		// state reads only its new files.
		physical, godebug := hugepage.PhysicalMemory(), os.Getenv("GODEBUG")
		opts.BeforeRead = func(inputBytes int64) {
			hugepage.PrepareHeap(hugeHeapSize(inputBytes, physical), godebug)
		}
	}
	res, err := pipeline.Run(ctx, in, exps, opts)
	if sig := interrupted(ctx); err != nil && sig != nil {
		return nil, fmt.Errorf("analyze: interrupted by %w; no readout was written and the run's temporary files were removed", sig)
	}
	var (
		ce *pipeline.ConfigError
		de *pipeline.DataError
		se *pipeline.SpillError
	)
	switch {
	case errors.As(err, &ce):
		return nil, usagef("analyze: %v", ce.Err)
	case errors.As(err, &de):
		return nil, &dataError{withShapeHint(de.Err, run)}
	case errors.As(err, &se):
		return nil, fmt.Errorf("analyze: --memory-limit: %w", se.Err)
	case err != nil:
		return nil, fmt.Errorf("analyze: %w", err)
	}
	if st := res.State; st != nil && st.Recomputed && run.stderr != nil {
		fmt.Fprintf(run.stderr, "armtally: --state: read every file again: %s\n", st.Reason)
	}
	return res, nil
}

// writeAudits adds each experiment's per-unit audit table to set, at
// run.audit or, with several experiments, at run.audit with "-KEY" before
// the extension.
func writeAudits(set *report.OutputSet, run *analyzeRun, res *pipeline.Result) error {
	for i, e := range run.experiments {
		units, err := res.Units(i)
		if err != nil {
			var de *pipeline.DataError
			if errors.As(err, &de) {
				return &dataError{de.Err}
			}
			return fmt.Errorf("experiment %q: %w", e.spec.Key, err)
		}
		path := report.PerExperimentPath(run.audit, e.spec.Key, len(run.experiments))
		err = set.Add(path, func(w io.Writer) error { return report.WriteAudit(w, e.spec, units) })
		if err != nil {
			return fmt.Errorf("writing the audit table of experiment %q: %w", e.spec.Key, err)
		}
	}
	return nil
}
