package main

import (
	"fmt"
	"io"
	"iter"
	"path/filepath"
	"runtime/debug"
	"slices"
	"strings"
	"time"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/spf13/pflag"

	"github.com/armtally/armtally/experiment"
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

Metrics (--metric, repeatable):
  NAME=EVENT[,EVENT...][:WINDOW][@TARGET]
  WINDOW is a number with a unit s, m, h, d or w (7d, 36h); none is unlimited.
  TARGET is a rate (0.12 or 12%) every arm is also tested against.

Guardrails (--guardrail, repeatable): a metric that must not get worse,
  NAME=EVENT[,EVENT...][:WINDOW]~MARGIN
  MARGIN is absolute in percentage points (0.5pp) or relative to the
  control's rate (5%). Each treatment is tested for non-inferiority; mark
  metrics where lower is better (unsubscribes, refunds) with --lower-is-better.

Comparisons of each treatment with the control on each metric (guardrails
apart) form one family, adjusted with --adjust (Holm by default).

Examples:
  armtally analyze --demo
  armtally analyze --demo --json readout.json --out readout.md
  armtally analyze events.parquet --experiment checkout-flow-2026 --metric purchase=purchase:7d
  armtally analyze exports/ --experiment search-ranking --exposure-event assigned --control baseline --arms baseline,fresh-ranker --split 80,20 --start 2026-11-01 --end 2026-11-29 --metric signup=account_created:3d@10% --alpha 0.01
  armtally analyze events.parquet --experiment checkout-flow-2026 --metric purchase=purchase:7d --guardrail unsubscribe=newsletter_unsubscribe:7d~0.2pp --lower-is-better unsubscribe --adjust bonferroni
  armtally analyze events.csv --user-col visitor_id --ts-col event_time --metric buy=order_placed,order_paid:14d --fail-on-sample-ratio
  armtally analyze --spec experiments.toml
  armtally analyze --spec experiments.toml --experiment search-ranking --alpha 0.01 exports/dt=2026-11-30/
  armtally analyze exports/ --delimiter tab --max-bad-share 0.001 --metric purchase=purchase:7d

Flags:
`

// analyzeFlags holds the values of the analyze flags.
type analyzeFlags struct {
	demo                                     bool
	userCol, tsCol, eventCol, expCol, armCol string
	epochUnit                                string
	segments                                 []string
	experiment, exposureEvent, control       string
	arms                                     []string
	split                                    string
	start, end                               string
	multiArm, maturity                       string
	metrics, guardrails, lowerIsBetter       []string
	interval, diffInterval, adjust, niMethod string
	alpha                                    float64
	alternative                              string
	minCount                                 int64
	srThreshold                              float64
	out, jsonOut                             string
	failOnSampleRatio                        bool
	spec                                     string
	delimiter                                string
	maxBadRows                               int64
	maxBadShare                              float64
	audit                                    string
	noProgress                               bool
	memoryLimit, spillDir                    string
}

func newAnalyzeFlagSet(f *analyzeFlags, stderr io.Writer) *pflag.FlagSet {
	fs := pflag.NewFlagSet("analyze", pflag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.SortFlags = false
	m := ingest.DefaultMapping()
	fs.StringVar(&f.spec, "spec", "", "read the input, column mapping, outputs and experiments from this TOML spec file (see armtally help spec); flags you give override it")
	fs.BoolVar(&f.demo, "demo", false, "analyse the embedded demo event log (its experiment, metrics and window are the defaults)")
	fs.StringVar(&f.experiment, "experiment", "", "experiment key on exposure rows (required when the log holds several experiments); with --spec, run only the file's experiment of this key")
	fs.StringVar(&f.exposureEvent, "exposure-event", "exposure", "event name of exposure rows")
	fs.StringVar(&f.control, "control", "control", "name of the control arm")
	fs.StringSliceVar(&f.arms, "arms", nil, "planned arms, comma-separated (the control is added first when missing); any other arm in the data is an error")
	fs.StringVar(&f.split, "split", "", "planned traffic shares of --arms, comma-separated (50,25,25); default equal")
	fs.StringArrayVar(&f.metrics, "metric", nil, "conversion metric NAME=EVENT[,EVENT...][:WINDOW][@TARGET] (repeatable)")
	fs.StringArrayVar(&f.guardrails, "guardrail", nil, "guardrail metric NAME=EVENT[,EVENT...][:WINDOW]~MARGIN, MARGIN 0.5pp (absolute) or 5% (of the control's rate) (repeatable)")
	fs.StringArrayVar(&f.lowerIsBetter, "lower-is-better", nil, "metric where a lower rate is the good outcome (repeatable)")
	fs.StringVar(&f.start, "start", "", "start of the analysis window, inclusive (RFC 3339 or YYYY-MM-DD); default: all data")
	fs.StringVar(&f.end, "end", "", "end of the analysis window, exclusive; default: no end (maturity is judged against the latest event)")
	fs.StringVar(&f.multiArm, "multi-arm", "exclude", "units exposed to several arms: exclude, or first (keep the first exposure's arm)")
	fs.StringVar(&f.maturity, "maturity", "exclude", "units whose attribution window has not closed: exclude or include")
	fs.Float64Var(&f.alpha, "alpha", 0.05, "significance level of every test; intervals are at 1 - alpha")
	fs.StringVar(&f.alternative, "alternative", "two-sided", "alternative hypothesis: two-sided, greater (treatment higher) or less; intervals are at 1 - 2 alpha for one-sided tests")
	fs.StringVar(&f.adjust, "adjust", "holm", "multiple-comparison adjustment over treatments x metrics: holm, bonferroni, hochberg, bh, by or none")
	fs.StringVar(&f.interval, "interval", experiment.IntervalWilson.String(), "interval of each arm's rate: wilson, clopper-pearson, agresti-coull or wald")
	fs.StringVar(&f.diffInterval, "difference-interval", experiment.DifferenceNewcombe.String(), "interval of each difference: newcombe or wald")
	fs.StringVar(&f.niMethod, "non-inferiority-method", "farrington-manning", "variance of guardrail tests: farrington-manning, miettinen-nurminen or wald")
	fs.Int64Var(&f.minCount, "min-count", 5, "conversions and non-conversions per arm needed to trust the normal approximation")
	fs.Float64Var(&f.srThreshold, "sample-ratio-threshold", experiment.DefaultSampleRatioThreshold, "p-value below which the sample ratio check fails")
	fs.StringVarP(&f.out, "out", "o", "", "write the Markdown readout to this file instead of stdout")
	fs.StringVar(&f.jsonOut, "json", "", "also write the JSON readout to this file")
	fs.StringVar(&f.audit, "audit", "", "also write the per-unit audit table (Parquet) to this file; with several experiments, one file each, named FILE-KEY.parquet")
	fs.BoolVar(&f.failOnSampleRatio, "fail-on-sample-ratio", false, "exit with code 4 when the sample ratio check fails")
	fs.StringVar(&f.memoryLimit, "memory-limit", "", "keep the per-unit state of an event log under about this size (such as 800MB or 2GiB): the rows go to disk in hash partitions of the units, tallied a group at a time and merged; no --audit")
	fs.StringVar(&f.spillDir, "spill-dir", "", "folder for the partition files of --memory-limit (default: the system's temporary folder)")
	fs.BoolVar(&f.noProgress, "no-progress", false, "do not show the rows read, rate and elapsed time on stderr while reading (shown only when stderr is a terminal, and not for unit or counts tables)")
	fs.StringVar(&f.userCol, "user-col", m.User, "column holding the unit (user) id")
	fs.StringVar(&f.tsCol, "ts-col", m.TS, "column holding the event time")
	fs.StringVar(&f.eventCol, "event-col", m.Event, "column holding the event name")
	fs.StringVar(&f.expCol, "experiment-col", m.Experiment, "column holding the experiment key (\"\" when the log has none)")
	fs.StringVar(&f.armCol, "arm-col", m.Arm, "column holding the arm name")
	fs.StringVar(&f.epochUnit, "epoch-unit", "", "unit of integer timestamps: s, ms, us or ns")
	fs.StringArrayVar(&f.segments, "segment", nil, "column to break every metric down by (read from each unit's first exposure row); exploratory results (repeatable)")
	fs.StringVar(&f.delimiter, "delimiter", ",", "field separator of CSV files: one character; tab or \\t for a tab")
	fs.Int64Var(&f.maxBadRows, "max-bad-rows", 0, "skip and count up to this many bad rows (-1: any number); 0 stops at the first")
	fs.Float64Var(&f.maxBadShare, "max-bad-share", 0, "skip and count bad rows up to this share of the rows read (0.001); checked at the end")
	return fs
}

// analyzeRun is what one analyze run does: read the sources once with the
// mapping, tally and analyse each experiment, and write the readouts.
type analyzeRun struct {
	sources []ingest.Source
	// shape is input.shape: events, units or counts.
	shape   string
	mapping ingest.Mapping
	// tsMapped says whether the ts column was named (by the spec file or
	// --ts-col): a unit table's exposure time column is optional.
	tsMapped bool
	// counts names the columns of a counts table.
	counts            ingest.CountsOptions
	delimiter         rune
	maxBadRows        int64
	maxBadShare       float64
	experiments       []builtExperiment
	out, jsonOut      string
	audit             string
	failOnSampleRatio bool
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
}

// builtExperiment is one experiment of a run, checked.
type builtExperiment struct {
	spec experiment.Spec
	opts experiment.AnalysisOptions
	// metricColumns maps each metric to its column of a unit table.
	metricColumns []ingest.ColumnMap
}

// parseAnalyze parses the analyze command line, and the spec file it
// names, into a run. Flags the user set override the spec file's values.
func parseAnalyze(args []string, stdout, stderr io.Writer) (*analyzeRun, error) {
	var f analyzeFlags
	fs := newAnalyzeFlagSet(&f, stderr)
	if err := parseFlags(fs, args, analyzeUsage, stdout); err != nil {
		return nil, err
	}
	var sf *specFile
	if f.spec != "" {
		var err error
		if sf, err = readSpecFile(f.spec); err != nil {
			return nil, err
		}
		if err := sf.unsupported(); err != nil {
			return nil, err
		}
	}
	run := &analyzeRun{shape: shapeEvents}
	if sf != nil {
		run.shape, run.counts = sf.shape, sf.counts
	}

	// Experiments: the spec file's (those --experiment picks), or one
	// made from the flags alone.
	var exps []*expSettings
	if sf == nil || len(sf.experiments) == 0 {
		if f.demo {
			demoDefaults(fs, &f)
		}
		e := newExpSettings()
		if err := applyExperimentFlags(fs, &f, e, true); err != nil {
			return nil, err
		}
		exps = append(exps, e)
	} else {
		exps = sf.experiments
		if fs.Changed("experiment") {
			exps = nil
			var keys []string
			for _, e := range sf.experiments {
				keys = append(keys, e.key)
				if e.key == f.experiment {
					exps = append(exps, e)
				}
			}
			if len(exps) == 0 {
				return nil, usagef("analyze: --experiment %q: %s has no such experiment (it has %s)", f.experiment, sf.name, strings.Join(keys, ", "))
			}
		}
		if len(exps) > 1 {
			for _, name := range []string{"arms", "split"} {
				if fs.Changed(name) {
					return nil, usagef("analyze: --%s applies to one experiment, and %s has %d: choose one with --experiment", name, sf.name, len(exps))
				}
			}
		}
		for _, e := range exps {
			if err := applyExperimentFlags(fs, &f, e, false); err != nil {
				return nil, err
			}
		}
	}
	if err := applyLowerIsBetter(f.lowerIsBetter, exps); err != nil {
		return nil, err
	}
	for _, name := range f.segments {
		if name = strings.TrimSpace(name); name == "" {
			return nil, usagef("analyze: --segment: empty column name")
		}
		for _, e := range exps {
			if !slices.Contains(e.segments, name) {
				e.segments = append(e.segments, name)
			}
		}
	}
	for _, e := range exps {
		spec, opts, err := e.build()
		if err != nil {
			return nil, err
		}
		be := builtExperiment{spec: spec, opts: opts}
		for _, ms := range e.metrics {
			col := ms.column
			if col == "" {
				col = ms.metric.Name
			}
			be.metricColumns = append(be.metricColumns, ingest.ColumnMap{Logical: ms.metric.Name, Physical: col})
		}
		run.experiments = append(run.experiments, be)
	}

	// Column mapping: the spec file's, then the flags.
	run.mapping = ingest.DefaultMapping()
	if sf != nil {
		run.mapping = sf.mapping
	}
	for _, c := range []struct {
		flag string
		v    string
		dst  *string
	}{
		{"user-col", f.userCol, &run.mapping.User},
		{"ts-col", f.tsCol, &run.mapping.TS},
		{"event-col", f.eventCol, &run.mapping.Event},
		{"experiment-col", f.expCol, &run.mapping.Experiment},
		{"arm-col", f.armCol, &run.mapping.Arm},
		{"epoch-unit", f.epochUnit, &run.mapping.EpochUnit},
	} {
		if sf == nil || fs.Changed(c.flag) {
			*c.dst = c.v
		}
	}
	for _, name := range f.segments {
		if name = strings.TrimSpace(name); !slices.Contains(run.mapping.Segments, name) {
			run.mapping.Segments = append(run.mapping.Segments, name)
		}
	}
	run.tsMapped = fs.Changed("ts-col")
	if sf != nil {
		_, inFile := sf.mappingFrom["ts"]
		run.tsMapped = run.tsMapped || inFile
	}
	switch run.mapping.EpochUnit {
	case "", "s", "ms", "us", "ns":
	default:
		return nil, usagef("analyze: --epoch-unit %q: want s, ms, us or ns", run.mapping.EpochUnit)
	}

	// Reading: the spec file's delimiter and bad-row budget, then the flags.
	if sf != nil {
		run.delimiter, run.maxBadRows, run.maxBadShare = sf.delimiter, sf.maxBadRows, sf.maxBad
	}
	if sf == nil || fs.Changed("delimiter") {
		d, err := parseDelimiter(f.delimiter)
		if err != nil {
			return nil, usagef("analyze: --delimiter: %v", err)
		}
		run.delimiter = d
	}
	if sf == nil || fs.Changed("max-bad-rows") {
		if f.maxBadRows < ingest.NoLimit {
			return nil, usagef("analyze: --max-bad-rows %d: want 0 or more, or -1 for no limit", f.maxBadRows)
		}
		run.maxBadRows = f.maxBadRows
	}
	if sf == nil || fs.Changed("max-bad-share") {
		if !(f.maxBadShare >= 0 && f.maxBadShare <= 1) {
			return nil, usagef("analyze: --max-bad-share %v: want a share from 0 to 1", f.maxBadShare)
		}
		run.maxBadShare = f.maxBadShare
	}

	// Outputs: the spec file's, then the flags.
	if sf != nil {
		run.out, run.jsonOut = sf.markdown, sf.json
		if sf.failOnSampleRatio != nil {
			run.failOnSampleRatio = *sf.failOnSampleRatio
		}
	}
	if sf == nil || fs.Changed("out") {
		run.out = f.out
	}
	if sf == nil || fs.Changed("json") {
		run.jsonOut = f.jsonOut
	}
	if sf != nil {
		run.audit = sf.audit
	}
	if sf == nil || fs.Changed("audit") {
		run.audit = f.audit
	}
	if run.audit != "" && run.shape == shapeCounts {
		return nil, usagef("analyze: an audit table lists units, and a counts table has none (output.audit or --audit)")
	}
	if sf == nil || fs.Changed("fail-on-sample-ratio") {
		run.failOnSampleRatio = f.failOnSampleRatio
	}
	run.stderr = stderr
	run.progress = !f.noProgress && isTerminal(stderr)
	if f.memoryLimit != "" {
		n, err := parseBytes(f.memoryLimit)
		if err != nil {
			return nil, usagef("analyze: --memory-limit: %v", err)
		}
		if run.shape != shapeEvents {
			return nil, usagef("analyze: --memory-limit applies to event logs; a unit or counts table is tallied row by row already")
		}
		if run.audit != "" {
			return nil, usagef("analyze: --memory-limit and --audit together: the audit table lists every unit in key order, which needs them all in memory")
		}
		run.memoryLimit = n
	}
	run.spillDir = f.spillDir

	// Sources: --demo, the arguments, or the spec file's input.paths.
	switch {
	case f.demo:
		if fs.NArg() > 0 {
			return nil, usagef("analyze: --demo takes no input files (got %s)", strings.Join(fs.Args(), " "))
		}
		name, data := sampledata.Demo()
		run.sources = []ingest.Source{ingest.BytesSource(name, data)}
	default:
		paths := fs.Args()
		if len(paths) == 0 && sf != nil {
			paths = sf.paths
		}
		if len(paths) == 0 {
			if sf != nil {
				return nil, usagef("analyze: name at least one input file or folder, in %s (input.paths) or on the command line", sf.name)
			}
			return nil, usagef("analyze: name at least one input file or folder, or use --demo")
		}
		var err error
		run.sources, err = ingest.FileSources(paths)
		if err != nil {
			return nil, &dataError{err}
		}
		if len(run.sources) == 0 {
			return nil, &dataError{fmt.Errorf("no .csv, .csv.gz, .parquet or .parq files in %s", strings.Join(paths, ", "))}
		}
	}
	if sf != nil {
		if err := sf.checkPartitions(run.sources); err != nil {
			return nil, err
		}
	}
	return run, nil
}

// applyExperimentFlags applies the experiment flags to e: every flag when
// all is set (no spec file, or one without experiments), otherwise only the
// flags the user set, which override the file. --experiment sets the key
// only when all is set; with a spec file it picks experiments instead.
func applyExperimentFlags(fs *pflag.FlagSet, f *analyzeFlags, e *expSettings, all bool) error {
	set := func(name string) bool { return all || fs.Changed(name) }
	flag := func(name string) origin { return origin{flag: "--" + name} }
	if all {
		e.key = f.experiment
		e.from["key"] = flag("experiment")
	}
	for _, s := range []struct {
		flag, key string
		v         string
		dst       *string
	}{{"exposure-event", "exposure_event", f.exposureEvent, &e.exposureEvent}, {"control", "control", f.control, &e.control}} {
		if !set(s.flag) {
			continue
		}
		if s.v == "" {
			return usagef("analyze: --exposure-event and --control must not be empty")
		}
		*s.dst = s.v
		e.from[s.key] = flag(s.flag)
	}
	if set("arms") {
		e.arms, e.armsAddControl = nil, true
		seen := map[string]bool{}
		for _, a := range f.arms {
			a = strings.TrimSpace(a)
			if a == "" || seen[a] {
				return usagef("analyze: --arms %q: empty or repeated arm name", strings.Join(f.arms, ","))
			}
			seen[a] = true
			e.arms = append(e.arms, a)
		}
		e.from["arms"] = flag("arms")
	}
	if set("split") {
		e.split = nil
		if f.split != "" {
			shares, err := parseShares(f.split)
			if err != nil {
				return usagef("analyze: %v", err)
			}
			e.split = shares
		}
		e.from["split"] = flag("split")
	}
	var err error
	if set("start") {
		if e.start, err = parseTime("start", f.start); err != nil {
			return err
		}
		e.from["start"] = flag("start")
	}
	if set("end") {
		if e.end, err = parseTime("end", f.end); err != nil {
			return err
		}
		e.from["end"] = flag("end")
	}
	if set("multi-arm") {
		if e.multiArm, err = experiment.ParseMultiArmPolicy(f.multiArm); err != nil {
			return usagef("analyze: --multi-arm: %v", err)
		}
	}
	if set("maturity") {
		if e.maturity, err = experiment.ParseMaturityPolicy(f.maturity); err != nil {
			return usagef("analyze: --maturity: %v", err)
		}
	}
	if set("metric") || set("guardrail") {
		e.metrics = nil
		for _, s := range f.metrics {
			m, err := parseMetric(s)
			if err != nil {
				return usagef("analyze: --metric: %v", err)
			}
			e.metrics = append(e.metrics, metricSetting{metric: m, role: rolePrimary, from: flag("metric")})
		}
		for _, s := range f.guardrails {
			m, err := parseGuardrail(s)
			if err != nil {
				return usagef("analyze: --guardrail: %v", err)
			}
			e.metrics = append(e.metrics, metricSetting{metric: m, role: roleGuardrail, from: flag("guardrail")})
		}
		e.from["metrics"] = flag("metric")
	}
	if set("alpha") {
		if err := e.setAlpha(f.alpha, flag("alpha")); err != nil {
			return err
		}
	}
	for _, s := range []struct {
		flag string
		v    string
		fn   func(string, origin) error
	}{
		{"alternative", f.alternative, e.setAlternative},
		{"adjust", f.adjust, e.setAdjust},
		{"interval", f.interval, e.setInterval},
		{"difference-interval", f.diffInterval, e.setDifferenceInterval},
		{"non-inferiority-method", f.niMethod, e.setNonInferiority},
	} {
		if set(s.flag) {
			if err := s.fn(s.v, flag(s.flag)); err != nil {
				return err
			}
		}
	}
	if set("min-count") {
		if err := e.setMinCount(f.minCount, flag("min-count")); err != nil {
			return err
		}
	}
	if set("sample-ratio-threshold") {
		if err := e.setSampleRatioThreshold(f.srThreshold, flag("sample-ratio-threshold")); err != nil {
			return err
		}
	}
	return nil
}

// applyLowerIsBetter marks the metrics named by --lower-is-better in every
// experiment that has them; a name no experiment has is an error.
func applyLowerIsBetter(names []string, exps []*expSettings) error {
	for _, name := range names {
		found := false
		for _, e := range exps {
			for i := range e.metrics {
				if e.metrics[i].metric.Name == name {
					e.metrics[i].metric.LowerIsBetter, found = true, true
				}
			}
		}
		if !found {
			return usagef("analyze: --lower-is-better %q: no metric of that name", name)
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
	set("experiment", func() { f.experiment = d.Experiment })
	set("exposure-event", func() { f.exposureEvent = d.ExposureEvent })
	set("control", func() { f.control = d.Control })
	set("arms", func() {
		f.arms = nil
		for _, a := range d.Arms {
			f.arms = append(f.arms, a.Name)
		}
	})
	set("start", func() { f.start = d.Start.Format(time.RFC3339) })
	set("end", func() { f.end = d.End.Format(time.RFC3339) })
	set("metric", func() {
		f.metrics = nil
		for _, m := range d.Metrics {
			f.metrics = append(f.metrics, fmt.Sprintf("%s=%s:%dh", m.Event, m.Event, int64(m.Window/time.Hour)))
		}
	})
}

func runAnalyze(args []string, stdout, stderr io.Writer) error {
	run, err := parseAnalyze(args, stdout, stderr)
	if err != nil {
		return err
	}
	readouts, talliers, err := analyze(run)
	if err != nil {
		return err
	}
	if run.jsonOut != "" {
		if err := report.WriteFileAtomic(run.jsonOut, func(w io.Writer) error { return report.WriteJSON(w, readouts) }); err != nil {
			return fmt.Errorf("writing the JSON readout: %w", err)
		}
	}
	md := func(w io.Writer) error { return report.WriteMarkdown(w, readouts, report.MarkdownOptions{}) }
	if run.out != "" {
		err = report.WriteFileAtomic(run.out, md)
	} else {
		err = md(stdout)
	}
	if err != nil {
		return fmt.Errorf("writing the Markdown readout: %w", err)
	}
	if run.audit != "" {
		if err := writeAudits(run, talliers); err != nil {
			return err
		}
	}
	if !run.failOnSampleRatio {
		return nil
	}
	var failed []string
	for _, r := range readouts {
		if sr := r.SampleRatio; sr.Checked && sr.Mismatch {
			failed = append(failed, fmt.Sprintf("%s: p = %.3g < %g", r.Experiment, sr.PValue, sr.Threshold))
		}
	}
	if len(failed) > 0 {
		if len(readouts) == 1 {
			_, detail, _ := strings.Cut(failed[0], ": ")
			return fmt.Errorf("%w: %s (see the readout)", errSampleRatio, detail)
		}
		return fmt.Errorf("%w in %d of %d experiments (%s; see the readouts)", errSampleRatio, len(failed), len(readouts), strings.Join(failed, "; "))
	}
	return nil
}

// recordReader is what the event-log reader and the table reader have in
// common.
type recordReader interface {
	Schema() *arrow.Schema
	Next() bool
	Record() arrow.RecordBatch
	Err() error
	Stats() ingest.Stats
	Close() error
}

// spillPartitions is the number of hash partitions of --memory-limit.
const spillPartitions = 64

// spillBytesPerRow is the memory a tally takes per row it reads, as
// --memory-limit estimates it: analysing the 10M-unit benchmark log in
// memory peaked at 1.4 GB for 17M rows past the event filter, about 80
// bytes a row, rounded up for the collector's headroom.
const spillBytesPerRow = 100

// tallySpilled tallies the rows of an event log that analyze spilled to
// disk (--memory-limit): the partitions are taken in groups of about
// run.memoryLimit / spillBytesPerRow rows, each group tallied by fresh
// talliers that share the whole input's freshness, and the tallies of the
// groups merged, which is exact since a unit's rows are all in one
// partition (experiment.MergeTallies). st holds the reader's counts.
func tallySpilled(run *analyzeRun, spill *ingest.Spill, st ingest.Stats) ([]experiment.Tally, error) {
	fresh, hasFresh := spill.MaxTS()
	if st.Filtered > 0 && (!hasFresh || st.FilteredMaxTS > fresh) {
		fresh, hasFresh = st.FilteredMaxTS, true
	}
	maxRows := max(1, run.memoryLimit/spillBytesPerRow)
	parts := make([][]experiment.Tally, len(run.experiments))
	for p := 0; p < spill.Partitions(); {
		q, rows := p, int64(0)
		for q < spill.Partitions() && (q == p || rows+spill.Rows(q) <= maxRows) {
			rows += spill.Rows(q)
			q++
		}
		talliers := make([]*experiment.Tallier, len(run.experiments))
		for i, e := range run.experiments {
			tl, err := experiment.NewTallier(e.spec)
			if err != nil {
				return nil, usagef("analyze: %v", err)
			}
			talliers[i] = tl
		}
		for k := p; k < q; k++ {
			if err := addSpilled(spill, k, talliers); err != nil {
				return nil, err
			}
		}
		for i, tl := range talliers {
			if p == 0 {
				tl.AddFiltered(st.Filtered, st.FilteredMaxTS)
			}
			if hasFresh {
				tl.SeeTime(fresh)
			}
			t, err := tl.Tally()
			if err != nil {
				return nil, &dataError{err}
			}
			parts[i] = append(parts[i], t)
		}
		p = q
	}
	out := make([]experiment.Tally, len(run.experiments))
	for i, e := range run.experiments {
		t, err := experiment.MergeTallies(e.spec, parts[i]...)
		if err != nil {
			return nil, &dataError{err}
		}
		out[i] = t
	}
	return out, nil
}

// addSpilled feeds partition k of spill to the talliers.
func addSpilled(spill *ingest.Spill, k int, talliers []*experiment.Tallier) error {
	sr, err := spill.Reader(k, nil, 0)
	if err != nil {
		return fmt.Errorf("analyze: --memory-limit: %w", err)
	}
	defer sr.Close()
	for sr.Next() {
		for _, tl := range talliers {
			if err := tl.Add(sr.Record()); err != nil {
				return &dataError{err}
			}
		}
	}
	if err := sr.Err(); err != nil {
		return fmt.Errorf("analyze: --memory-limit: %w", err)
	}
	return nil
}

// newRecordReader returns the reader of the run's input shape. For an
// event log, events lists the events the talliers use: the reader leaves
// out the rows of other events and counts them (see ingest.Options.Events).
func newRecordReader(run *analyzeRun, events []string) (recordReader, error) {
	m := run.mapping
	switch run.shape {
	case shapeUnits, shapeCounts:
		e := run.experiments[0] // a table holds one experiment
		var segs []ingest.ColumnMap
		for _, s := range e.spec.Segments {
			segs = append(segs, ingest.ColumnMap{Logical: s, Physical: s})
		}
		if run.shape == shapeUnits {
			ts := ""
			if run.tsMapped {
				ts = m.TS
			}
			return ingest.NewUnitTableReader(run.sources, ingest.UnitTableOptions{Unit: m.User, Arm: m.Arm, TS: ts,
				EpochUnit: m.EpochUnit, Metrics: e.metricColumns, Segments: segs})
		}
		o := run.counts
		o.Arm, o.Segments = m.Arm, segs
		for _, mt := range e.spec.Metrics {
			o.Metrics = append(o.Metrics, mt.Name)
		}
		return ingest.NewCountsReader(run.sources, o)
	}
	exposure := ""
	for i, e := range run.experiments {
		if i > 0 && e.spec.ExposureEvent != exposure {
			return nil, fmt.Errorf("not supported yet: experiments with different exposure events in one run (%q and %q); run them separately", exposure, e.spec.ExposureEvent)
		}
		exposure = e.spec.ExposureEvent
	}
	// Planned arms are checked row by row, so that an exposure in an arm
	// that is not planned is a bad row (unknown_arm) named by file, row and
	// column, skipped and counted under an error budget.
	planned := map[string][]string{}
	for _, e := range run.experiments {
		if len(e.spec.Arms) > 0 {
			planned[e.spec.Key] = e.spec.Arms
		}
	}
	// An experiment without a key takes every exposure row: its arms are
	// listed under "", which ingest applies to any key.
	return ingest.NewReader(run.sources, ingest.Options{Mapping: m, ExposureEvent: exposure, PlannedArms: planned,
		Delimiter: run.delimiter, MaxBadRows: run.maxBadRows, MaxBadShare: run.maxBadShare, Events: events})
}

// analyze reads the sources once, feeds every record batch to one tallier
// per experiment and analyses each tally. The readouts follow the order of
// run.experiments.
func analyze(run *analyzeRun) ([]experiment.Readout, []tallier, error) {
	talliers := make([]tallier, len(run.experiments))
	// The events the experiments use (nil for a unit or counts table):
	// the reader leaves out the rows of every other event.
	var events []string
	for i, e := range run.experiments {
		var err error
		if talliers[i], err = newTallier(run.shape, e.spec); err != nil {
			return nil, nil, usagef("analyze: %v", err)
		}
		if tl, ok := talliers[i].(*experiment.Tallier); ok {
			for _, ev := range tl.Events() {
				if !slices.Contains(events, ev) {
					events = append(events, ev)
				}
			}
		}
	}
	r, err := newRecordReader(run, events)
	if err != nil {
		return nil, nil, usagef("analyze: %v", err)
	}
	defer r.Close()
	var spill *ingest.Spill
	if run.memoryLimit > 0 {
		// The collector's soft limit, so that it works harder as the
		// heap nears the limit rather than letting garbage pile up.
		debug.SetMemoryLimit(run.memoryLimit)
		if spill, err = ingest.NewSpill(run.spillDir, spillPartitions, r.Schema()); err != nil {
			return nil, nil, fmt.Errorf("analyze: --memory-limit: %w", err)
		}
		defer spill.Close()
	}
	stopProgress := withProgress(run, r)
	defer stopProgress()
	for r.Next() {
		rec := r.Record()
		if spill != nil {
			if err := spill.Add(rec); err != nil {
				return nil, nil, fmt.Errorf("analyze: --memory-limit: %w", err)
			}
			continue
		}
		for _, tl := range talliers {
			if err := tl.Add(rec); err != nil {
				return nil, nil, &dataError{err}
			}
		}
	}
	stopProgress()
	if err := r.Err(); err != nil {
		return nil, nil, &dataError{err}
	}
	st := r.Stats()
	tallies := make([]experiment.Tally, len(run.experiments))
	if spill != nil {
		if tallies, err = tallySpilled(run, spill, st); err != nil {
			return nil, nil, err
		}
	} else {
		for i, tl := range talliers {
			if tl, ok := tl.(*experiment.Tallier); ok && st.Filtered > 0 {
				tl.AddFiltered(st.Filtered, st.FilteredMaxTS)
			}
			if tallies[i], err = tl.Tally(); err != nil {
				return nil, nil, &dataError{err}
			}
		}
	}
	readouts := make([]experiment.Readout, len(run.experiments))
	for i, e := range run.experiments {
		t := tallies[i]
		opts := e.opts
		opts.RowsRead = r.Stats().RowsRead
		opts.BadRows = r.Stats().BadRows
		if readouts[i], err = experiment.Analyze(e.spec, t, opts); err != nil {
			return nil, nil, &dataError{err}
		}
	}
	return readouts, talliers, nil
}

// writeAudits writes each experiment's per-unit audit table to run.audit,
// or, with several experiments, to run.audit with "-KEY" before the
// extension.
func writeAudits(run *analyzeRun, talliers []tallier) error {
	for i, e := range run.experiments {
		var units iter.Seq[experiment.UnitRecord]
		switch tl := talliers[i].(type) {
		case *experiment.Tallier:
			var err error
			if units, err = tl.Units(); err != nil {
				return &dataError{err}
			}
		case *experiment.UnitTableTallier:
			units = tl.Units()
		default:
			return fmt.Errorf("experiment %q: its input has no units to audit", e.spec.Key)
		}
		path := auditPath(run.audit, e.spec.Key, len(run.experiments))
		err := report.WriteFileAtomic(path, func(w io.Writer) error { return report.WriteAudit(w, e.spec, units) })
		if err != nil {
			return fmt.Errorf("writing the audit table of experiment %q: %w", e.spec.Key, err)
		}
	}
	return nil
}

// auditPath returns the audit file of the experiment key: path itself for
// a run of one experiment, else path with "-KEY" before its extension
// (characters other than letters, digits, '.', '_' and '-' in the key
// become '_').
func auditPath(path, key string, experiments int) string {
	if experiments == 1 {
		return path
	}
	safe := strings.Map(func(r rune) rune {
		switch {
		case r >= 'a' && r <= 'z', r >= 'A' && r <= 'Z', r >= '0' && r <= '9', r == '.', r == '_', r == '-':
			return r
		}
		return '_'
	}, key)
	ext := filepath.Ext(path)
	return strings.TrimSuffix(path, ext) + "-" + safe + ext
}
