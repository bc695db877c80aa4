package main

import (
	"fmt"
	"io"
	"strings"
	"time"

	"github.com/spf13/pflag"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/stats"
	"github.com/armtally/armtally/ingest"
	"github.com/armtally/armtally/report"
	"github.com/armtally/armtally/sampledata"
)

const analyzeUsage = `Usage: armtally analyze [flags] FILE|FOLDER...
       armtally analyze --demo [flags]

Reads the event log in the named Parquet (.parquet, .parq) and CSV (.csv)
files (a folder contributes every such file under it) and writes a readout
of one experiment: Markdown to stdout (or --out), JSON to --json.

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

Flags:
`

// analyzeFlags holds the values of the analyze flags.
type analyzeFlags struct {
	demo                                     bool
	userCol, tsCol, eventCol, expCol, armCol string
	epochUnit                                string
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
}

func newAnalyzeFlagSet(f *analyzeFlags, stderr io.Writer) *pflag.FlagSet {
	fs := pflag.NewFlagSet("analyze", pflag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.SortFlags = false
	m := ingest.DefaultMapping()
	fs.BoolVar(&f.demo, "demo", false, "analyse the embedded demo event log (its experiment, metrics and window are the defaults)")
	fs.StringVar(&f.experiment, "experiment", "", "experiment key on exposure rows (required when the log holds several experiments)")
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
	fs.StringVar(&f.interval, "interval", experiment.IntervalWilson, "interval of each arm's rate: wilson, clopper-pearson, agresti-coull or wald")
	fs.StringVar(&f.diffInterval, "difference-interval", experiment.DifferenceNewcombe, "interval of each difference: newcombe or wald")
	fs.StringVar(&f.niMethod, "non-inferiority-method", "farrington-manning", "variance of guardrail tests: farrington-manning, miettinen-nurminen or wald")
	fs.Int64Var(&f.minCount, "min-count", 5, "conversions and non-conversions per arm needed to trust the normal approximation")
	fs.Float64Var(&f.srThreshold, "sample-ratio-threshold", experiment.DefaultSampleRatioThreshold, "p-value below which the sample ratio check fails")
	fs.StringVarP(&f.out, "out", "o", "", "write the Markdown readout to this file instead of stdout")
	fs.StringVar(&f.jsonOut, "json", "", "also write the JSON readout to this file")
	fs.BoolVar(&f.failOnSampleRatio, "fail-on-sample-ratio", false, "exit with code 4 when the sample ratio check fails")
	fs.StringVar(&f.userCol, "user-col", m.User, "column holding the unit (user) id")
	fs.StringVar(&f.tsCol, "ts-col", m.TS, "column holding the event time")
	fs.StringVar(&f.eventCol, "event-col", m.Event, "column holding the event name")
	fs.StringVar(&f.expCol, "experiment-col", m.Experiment, "column holding the experiment key (\"\" when the log has none)")
	fs.StringVar(&f.armCol, "arm-col", m.Arm, "column holding the arm name")
	fs.StringVar(&f.epochUnit, "epoch-unit", "", "unit of integer timestamps: s, ms, us or ns")
	return fs
}

// parseAnalyze parses the analyze command line into a spec, the analysis
// options, the sources and the flags.
func parseAnalyze(args []string, stdout, stderr io.Writer) (experiment.Spec, experiment.AnalysisOptions, []ingest.Source, analyzeFlags, error) {
	var f analyzeFlags
	var spec experiment.Spec
	opts := experiment.DefaultAnalysisOptions()
	fs := newAnalyzeFlagSet(&f, stderr)
	if err := parseFlags(fs, args, analyzeUsage, stdout); err != nil {
		return spec, opts, nil, f, err
	}
	var sources []ingest.Source
	if f.demo {
		if fs.NArg() > 0 {
			return spec, opts, nil, f, usagef("analyze: --demo takes no input files (got %s)", strings.Join(fs.Args(), " "))
		}
		demoDefaults(fs, &f)
		name, data := sampledata.Demo()
		sources = []ingest.Source{ingest.BytesSource(name, data)}
	} else {
		if fs.NArg() == 0 {
			return spec, opts, nil, f, usagef("analyze: name at least one input file or folder, or use --demo")
		}
		var err error
		sources, err = ingest.FileSources(fs.Args())
		if err != nil {
			return spec, opts, nil, f, &dataError{err}
		}
		if len(sources) == 0 {
			return spec, opts, nil, f, &dataError{fmt.Errorf("no .csv, .parquet or .parq files in %s", strings.Join(fs.Args(), ", "))}
		}
	}

	spec.Key = f.experiment
	spec.ExposureEvent = f.exposureEvent
	spec.Control = f.control
	if spec.ExposureEvent == "" || spec.Control == "" {
		return spec, opts, nil, f, usagef("analyze: --exposure-event and --control must not be empty")
	}
	if len(f.arms) > 0 {
		seen := map[string]bool{}
		for _, a := range f.arms {
			a = strings.TrimSpace(a)
			if a == "" || seen[a] {
				return spec, opts, nil, f, usagef("analyze: --arms %q: empty or repeated arm name", strings.Join(f.arms, ","))
			}
			seen[a] = true
			spec.Arms = append(spec.Arms, a)
		}
		if !seen[spec.Control] {
			spec.Arms = append([]string{spec.Control}, spec.Arms...)
		}
	}
	if f.split != "" {
		if len(spec.Arms) == 0 {
			return spec, opts, nil, f, usagef("analyze: --split needs --arms to say which arm each share belongs to")
		}
		shares, err := parseShares(f.split)
		if err != nil {
			return spec, opts, nil, f, usagef("analyze: %v", err)
		}
		if len(shares) != len(spec.Arms) {
			return spec, opts, nil, f, usagef("analyze: --split has %d shares for %d arms (%s)", len(shares), len(spec.Arms), strings.Join(spec.Arms, ", "))
		}
		spec.Split = shares
	}
	var err error
	if spec.Start, err = parseTime("start", f.start); err != nil {
		return spec, opts, nil, f, err
	}
	if spec.End, err = parseTime("end", f.end); err != nil {
		return spec, opts, nil, f, err
	}
	if spec.Start != nil && spec.End != nil && !spec.Start.Before(*spec.End) {
		return spec, opts, nil, f, usagef("analyze: --start %s is not before --end %s", f.start, f.end)
	}
	if spec.MultiArm, err = experiment.ParseMultiArmPolicy(f.multiArm); err != nil {
		return spec, opts, nil, f, usagef("analyze: --multi-arm: %v", err)
	}
	if spec.Maturity, err = experiment.ParseMaturityPolicy(f.maturity); err != nil {
		return spec, opts, nil, f, usagef("analyze: --maturity: %v", err)
	}
	if len(f.metrics) == 0 && len(f.guardrails) == 0 {
		return spec, opts, nil, f, usagef("analyze: name at least one metric with --metric NAME=EVENT[:WINDOW], for example --metric purchase=purchase:7d")
	}
	for _, s := range f.metrics {
		m, err := parseMetric(s)
		if err != nil {
			return spec, opts, nil, f, usagef("analyze: --metric: %v", err)
		}
		spec.Metrics = append(spec.Metrics, m)
	}
	for _, s := range f.guardrails {
		m, err := parseGuardrail(s)
		if err != nil {
			return spec, opts, nil, f, usagef("analyze: --guardrail: %v", err)
		}
		spec.Metrics = append(spec.Metrics, m)
	}
	for _, name := range f.lowerIsBetter {
		found := false
		for i := range spec.Metrics {
			if spec.Metrics[i].Name == name {
				spec.Metrics[i].LowerIsBetter, found = true, true
			}
		}
		if !found {
			return spec, opts, nil, f, usagef("analyze: --lower-is-better %q: no metric of that name", name)
		}
	}
	// Let the tallier check the rest of the spec now, as a usage error.
	if _, err := experiment.NewTallier(spec); err != nil {
		return spec, opts, nil, f, usagef("analyze: %v", err)
	}

	if !(f.alpha > 0 && f.alpha < 0.5) {
		return spec, opts, nil, f, usagef("analyze: --alpha %v is not strictly between 0 and 0.5", f.alpha)
	}
	opts.Stats.Alpha = f.alpha
	opts.Stats.Level = 0 // 1 - alpha, or 1 - 2 alpha for a one-sided alternative
	switch f.interval {
	case experiment.IntervalWilson, experiment.IntervalClopperPearson, experiment.IntervalAgrestiCoull, experiment.IntervalWald:
		opts.Interval = f.interval
	default:
		return spec, opts, nil, f, usagef("analyze: --interval %q: want wilson, clopper-pearson, agresti-coull or wald", f.interval)
	}
	switch f.diffInterval {
	case experiment.DifferenceNewcombe, experiment.DifferenceWald:
		opts.Difference = f.diffInterval
	default:
		return spec, opts, nil, f, usagef("analyze: --difference-interval %q: want newcombe or wald", f.diffInterval)
	}
	if opts.Adjust, err = stats.ParseAdjustMethod(f.adjust); err != nil {
		return spec, opts, nil, f, usagef("analyze: --adjust: %v", err)
	}
	switch f.niMethod {
	case "farrington-manning":
		opts.NonInferiority = stats.FarringtonManning
	case "miettinen-nurminen":
		opts.NonInferiority = stats.MiettinenNurminen
	case "wald":
		opts.NonInferiority = stats.WaldNonInferiority
	default:
		return spec, opts, nil, f, usagef("analyze: --non-inferiority-method %q: want farrington-manning, miettinen-nurminen or wald", f.niMethod)
	}
	if opts.Stats.Alternative, err = stats.ParseAlternative(f.alternative); err != nil {
		return spec, opts, nil, f, usagef("analyze: --alternative: %v", err)
	}
	if f.minCount < 1 {
		return spec, opts, nil, f, usagef("analyze: --min-count %d: must be at least 1", f.minCount)
	}
	opts.Stats.MinCount = f.minCount
	if !(f.srThreshold > 0 && f.srThreshold < 1) {
		return spec, opts, nil, f, usagef("analyze: --sample-ratio-threshold %v is not strictly between 0 and 1", f.srThreshold)
	}
	opts.SampleRatioThreshold = f.srThreshold
	switch f.epochUnit {
	case "", "s", "ms", "us", "ns":
	default:
		return spec, opts, nil, f, usagef("analyze: --epoch-unit %q: want s, ms, us or ns", f.epochUnit)
	}
	return spec, opts, sources, f, nil
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
	spec, opts, sources, f, err := parseAnalyze(args, stdout, stderr)
	if err != nil {
		return err
	}
	mapping := ingest.Mapping{User: f.userCol, TS: f.tsCol, Event: f.eventCol, Experiment: f.expCol, Arm: f.armCol, EpochUnit: f.epochUnit}
	readout, err := analyze(spec, opts, sources, ingest.Options{Mapping: mapping, ExposureEvent: spec.ExposureEvent})
	if err != nil {
		return err
	}
	readouts := []experiment.Readout{readout}
	if f.jsonOut != "" {
		if err := report.WriteFileAtomic(f.jsonOut, func(w io.Writer) error { return report.WriteJSON(w, readouts) }); err != nil {
			return fmt.Errorf("writing the JSON readout: %w", err)
		}
	}
	md := func(w io.Writer) error { return report.WriteMarkdown(w, readouts, report.MarkdownOptions{}) }
	if f.out != "" {
		err = report.WriteFileAtomic(f.out, md)
	} else {
		err = md(stdout)
	}
	if err != nil {
		return fmt.Errorf("writing the Markdown readout: %w", err)
	}
	if sr := readout.SampleRatio; f.failOnSampleRatio && sr.Checked && sr.Mismatch {
		return fmt.Errorf("%w: p = %.3g < %g (see the readout)", errSampleRatio, sr.PValue, sr.Threshold)
	}
	return nil
}

// analyze reads the sources, tallies them under spec and analyses the
// tally.
func analyze(spec experiment.Spec, opts experiment.AnalysisOptions, sources []ingest.Source, io ingest.Options) (experiment.Readout, error) {
	r, err := ingest.NewReader(sources, io)
	if err != nil {
		return experiment.Readout{}, usagef("analyze: %v", err)
	}
	defer r.Close()
	tl, err := experiment.NewTallier(spec)
	if err != nil {
		return experiment.Readout{}, usagef("analyze: %v", err)
	}
	for r.Next() {
		if err := tl.Add(r.Record()); err != nil {
			return experiment.Readout{}, &dataError{err}
		}
	}
	if err := r.Err(); err != nil {
		return experiment.Readout{}, &dataError{err}
	}
	t, err := tl.Tally()
	if err != nil {
		return experiment.Readout{}, &dataError{err}
	}
	opts.RowsRead = r.Stats().RowsRead
	readout, err := experiment.Analyze(spec, t, opts)
	if err != nil {
		return experiment.Readout{}, &dataError{err}
	}
	return readout, nil
}
