package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"slices"
	"strings"
	"time"

	"github.com/spf13/pflag"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/history"
	"github.com/armtally/armtally/experiment/monitor"
	"github.com/armtally/armtally/experiment/pipeline"
	"github.com/armtally/armtally/experiment/sequential"
	"github.com/armtally/armtally/experiment/specfile"
	"github.com/armtally/armtally/report"
	"github.com/armtally/armtally/report/chart"
)

// The opt-in exit codes of nightly monitoring: stale data (9,
// --max-staleness, checked before 4 to 7) and a crossed efficacy boundary
// (8, --exit-on-boundary, when none of 4 to 7 applies).
const (
	exitBoundary = 8
	exitStale    = 9
)

var (
	errBoundary = errors.New("efficacy boundary crossed")
	errStale    = errors.New("stale data")
)

// monitorFlags holds the nightly-monitoring flags of analyze.
type monitorFlags struct {
	sequential     []string
	plannedUnits   int64
	mixingVariance float64
	history        string
	asOf           string
	maxStaleness   string
	exitOnBoundary bool
	looksChart     string
	// given says whether a flag was given (every flag, without a spec
	// file); nil means none was.
	given func(string) bool
	// historyFrom and chartFrom say where the history file and the chart
	// over the looks were named: the flag or the spec file's key.
	historyFrom, chartFrom string
	// fileStaleness is the spec file's output.max_staleness when
	// --max-staleness is not given.
	fileStaleness time.Duration
}

func defineMonitorFlags(fs *pflag.FlagSet) *monitorFlags {
	f := &monitorFlags{}
	fs.StringArrayVar(&f.sequential, "sequential", nil, "sequential test of a metric's comparisons, valid however often the experiment is read: METRIC=obf|pocock|mixture, or a method alone for every primary and secondary metric (repeatable; the fixed-horizon analysis is kept beside it)")
	fs.Int64Var(&f.plannedUnits, "planned-units", 0, "planned units per arm: the information fraction of a look is the smaller arm's units over this (needed by obf and pocock)")
	fs.Float64Var(&f.mixingVariance, "mixing-variance", sequential.DefaultMixingVariance, "tau^2 of the mixture test, on the scale of the difference of rates squared (1e-4: a spread of one percentage point); fix it before the experiment starts")
	fs.StringVar(&f.history, "history", "", "SQLite file of the experiment's looks: each run stores its look (keyed by --as-of, else the data's freshness; a rerun of the same key replaces it) and the sequential tests read the earlier ones")
	fs.StringVar(&f.asOf, "as-of", "", "rerun a past night from a later export: rows at or after this instant (RFC 3339 or YYYY-MM-DD) are ignored (after_as_of) and it is the analysis end")
	fs.StringVar(&f.maxStaleness, "max-staleness", "", "exit with code 9 when the newest row is older than this (36h, 2d) at --as-of or now")
	fs.StringVar(&f.looksChart, "looks-chart", "", "also write a chart over the looks of --history to this file (SVG, or PNG when FILE ends in .png): each arm's cumulative rate with its interval, each treatment's statistic with its boundary (or difference with its confidence sequence), each arm's new units per day; linked from the Markdown readout; with several experiments, one file each, named FILE-KEY.svg")
	fs.BoolVar(&f.exitOnBoundary, "exit-on-boundary", false, "exit with code 8 when a comparison has crossed its sequential efficacy boundary (when no code 4 to 7 applies)")
	return f
}

// specMonitorFlags returns the monitoring flags with the spec file's
// output.history, output.looks_chart, output.max_staleness and
// output.exit_on_boundary in place of the flags not given; override says
// whether a flag was given (always, without a file).
func specMonitorFlags(f *monitorFlags, sf *specfile.File, override func(string) bool) *monitorFlags {
	g := *f
	g.given, g.historyFrom, g.chartFrom = override, "--history", "--looks-chart"
	if sf == nil {
		return &g
	}
	if !override("history") && sf.History != "" {
		g.history, g.historyFrom = sf.History, "output.history in "+sf.Name
	}
	if !override("looks-chart") && sf.LooksChart != "" {
		g.looksChart, g.chartFrom = sf.LooksChart, "output.looks_chart in "+sf.Name
	}
	if !override("max-staleness") && sf.MaxStaleness > 0 {
		g.fileStaleness = sf.MaxStaleness
	}
	if !override("exit-on-boundary") && sf.ExitOnBoundary != nil {
		g.exitOnBoundary = *sf.ExitOnBoundary
	}
	return &g
}

// monitorRun is the run's monitoring settings, checked.
type monitorRun struct {
	on       bool
	settings monitor.Settings
	// perExp[i] is the settings of experiment i: settings with the spec
	// file's methods, planned units and mixing variance where the flags
	// leave them.
	perExp  []monitor.Settings
	history string
	// historyFrom and chartFrom name where the history file and the
	// chart over the looks were named, for messages.
	historyFrom, chartFrom string
	asOf                   *time.Time
	exitOn                 bool
	// looksChart is the --looks-chart file; looks[i] are readout i's
	// looks, tonight's included, once monitorLooks has run.
	looksChart string
	looks      [][]history.Look
}

// applyMonitor checks the monitoring flags and applies --as-of to the
// experiments: the instant becomes each one's analysis end when its end is
// later or unset.
func applyMonitor(f *monitorFlags, run *analyzeRun) (*monitorRun, error) {
	m := &monitorRun{history: f.history, exitOn: f.exitOnBoundary, looksChart: f.looksChart,
		settings: monitor.Settings{Methods: map[string]monitor.Method{}, PlannedUnits: f.plannedUnits, WarningName: report.WarningCode,
			MixingVariance: f.mixingVariance, History: f.history != ""}}
	m.on = len(f.sequential) > 0 || f.history != "" || f.maxStaleness != "" || f.exitOnBoundary || f.fileStaleness > 0
	m.settings.MaxStaleness = f.fileStaleness
	for _, v := range f.sequential {
		if err := m.method(v, run); err != nil {
			return nil, err
		}
	}
	if f.plannedUnits < 0 {
		return nil, usagef("analyze: --planned-units %d: want a positive number of units per arm", f.plannedUnits)
	}
	if !(f.mixingVariance > 0) {
		return nil, usagef("analyze: --mixing-variance %v: want a positive number", f.mixingVariance)
	}
	if f.maxStaleness != "" {
		d, err := specfile.ParseWindow(f.maxStaleness)
		if err != nil || d <= 0 {
			return nil, usagef("analyze: --max-staleness %q: want a positive duration such as 36h or 2d", f.maxStaleness)
		}
		m.settings.MaxStaleness = d
	}
	if f.asOf != "" {
		if err := m.applyAsOf(f.asOf, run); err != nil {
			return nil, err
		}
	}
	if f.looksChart != "" && f.history == "" {
		return nil, usagef("analyze: %s draws the looks of --history: give --history FILE (or output.history)", f.chartFrom)
	}
	if m.on && len(run.experiments) > 0 && run.shape != experiment.InputEventLog && f.history != "" {
		return nil, usagef("analyze: %s reads the looks of an event log; a unit or counts table has no data freshness to key them by", f.historyFrom)
	}
	m.historyFrom, m.chartFrom = f.historyFrom, f.chartFrom
	// Last: each experiment's settings start from m.settings as the
	// flags left it.
	if err := m.applySpec(f, run); err != nil {
		return nil, err
	}
	return m, nil
}

func (m *monitorRun) method(v string, run *analyzeRun) error {
	name, meth, found := strings.Cut(v, "=")
	if !found {
		meth, name = name, ""
	}
	method, err := monitor.ParseMethod(meth)
	if err != nil {
		return usagef("analyze: --sequential %q: %v", v, err)
	}
	if name == "" {
		m.settings.Default = method
		return nil
	}
	for _, e := range run.experiments {
		for _, mt := range e.spec.Metrics {
			if mt.Name == name {
				m.settings.Methods[name] = method
				return nil
			}
		}
	}
	return usagef("analyze: --sequential %q: no metric named %q", v, name)
}

// applySpec sets each experiment's settings: the --sequential flags
// replace the spec file's experiment.metric.sequential keys when given;
// --planned-units and --mixing-variance, when given, replace
// experiment.planned_units and experiment.mixing_variance.
func (m *monitorRun) applySpec(f *monitorFlags, run *analyzeRun) error {
	given := func(name string) bool { return f.given == nil || f.given(name) }
	for _, e := range run.experiments {
		s := m.settings
		fm := e.monitoring
		if len(f.sequential) == 0 && len(fm.Sequential) > 0 {
			m.on = true
			s.Methods = map[string]monitor.Method{}
			for name, v := range fm.Sequential {
				meth, err := monitor.ParseMethod(v)
				if err != nil {
					return err // the spec file checked it
				}
				s.Methods[name] = meth
			}
		}
		if !given("planned-units") && fm.PlannedUnits > 0 {
			s.PlannedUnits = fm.PlannedUnits
		}
		if !given("mixing-variance") && fm.MixingVariance > 0 {
			s.MixingVariance = fm.MixingVariance
		}
		if s.PlannedUnits > 0 {
			m.perExp = append(m.perExp, s)
			continue
		}
		if name, ok := needsPlan(s); ok {
			if o, fromFile := fm.From[name]; fromFile && len(f.sequential) == 0 {
				return &specfile.Error{File: o.File, Line: o.Line, Key: o.Key,
					Msg: fmt.Sprintf("%q needs the planned units per arm: set experiment.planned_units or give --planned-units", fm.Sequential[name])}
			}
			return usagef("analyze: --sequential obf or pocock needs --planned-units N (the planned units per arm, from 'armtally plan')")
		}
		m.perExp = append(m.perExp, s)
	}
	return nil
}

// needsPlan returns a metric whose method needs the planned units ("" for
// the default method), if any.
func needsPlan(s monitor.Settings) (string, bool) {
	gs := func(x monitor.Method) bool { return x == monitor.OBrienFleming || x == monitor.Pocock }
	if gs(s.Default) {
		return "", true
	}
	var names []string
	for name, x := range s.Methods {
		if gs(x) {
			names = append(names, name)
		}
	}
	if len(names) == 0 {
		return "", false
	}
	slices.Sort(names)
	return names[0], true
}

func (m *monitorRun) applyAsOf(v string, run *analyzeRun) error {
	t, err := specfile.ParseTime(v)
	if err != nil {
		return usagef("analyze: --as-of: %v", err)
	}
	if run.shape != experiment.InputEventLog {
		return usagef("analyze: --as-of ignores rows by their time, and only an event log has a time on every row")
	}
	m.asOf = t
	for i := range run.experiments {
		s := &run.experiments[i].spec
		at := *t
		s.AsOf = &at
		if s.Start != nil && !s.Start.Before(at) {
			return usagef("analyze: --as-of %s is not after the analysis start %s", at.Format(time.RFC3339), s.Start.Format(time.RFC3339))
		}
		if s.End == nil || s.End.After(at) {
			s.End = &at
		}
	}
	return nil
}

// monitorLooks computes each readout's monitoring state from the history
// and stores tonight's look, before the outputs are written: a run that
// fails to store its look replaces no output.
func monitorLooks(ctx context.Context, m *monitorRun, res *pipeline.Result) error {
	if m == nil || !m.on {
		return nil
	}
	var store *history.Store
	if m.history != "" {
		var err error
		if store, err = history.Open(ctx, m.history); err != nil {
			return fmt.Errorf("analyze: --history: %w", err)
		}
		defer store.Close()
	}
	for i := range res.Readouts {
		r := &res.Readouts[i]
		s := m.settings
		if i < len(m.perExp) {
			s = m.perExp[i]
		}
		s.Now = time.Now()
		switch {
		case m.asOf != nil:
			s.At, s.KeyKind, s.Now = *m.asOf, history.AsOf, *m.asOf
		case r.Freshness != nil:
			s.At, s.KeyKind = *r.Freshness, history.Freshness
		default:
			return &dataError{fmt.Errorf("experiment %q: no valid row was read, so the look has no freshness to be keyed by (give --as-of)", r.Experiment)}
		}
		var earlier []history.Look
		if store != nil {
			if r.Experiment == "" {
				return usagef("analyze: --history keys looks by experiment, and this log has no experiment key")
			}
			var err error
			if earlier, err = store.Looks(ctx, r.Experiment); err != nil {
				return fmt.Errorf("analyze: --history: %w", err)
			}
		}
		mon, look, err := monitor.Compute(*r, s, earlier)
		if err != nil {
			return fmt.Errorf("analyze: %w", err)
		}
		r.Monitoring = mon
		if store != nil {
			if err := store.Put(ctx, look); err != nil {
				return fmt.Errorf("analyze: --history: %w", err)
			}
			all, err := store.Looks(ctx, r.Experiment)
			if err != nil {
				return fmt.Errorf("analyze: --history: %w", err)
			}
			m.looks = append(m.looks, all)
		}
	}
	return nil
}

// checkMonitorOutcome returns errStale when a readout's data is stale.
func checkMonitorStale(readouts []experiment.Readout) error {
	var stale []string
	for _, r := range readouts {
		if m := r.Monitoring; m != nil && m.Alerts.Stale {
			age := "no valid row"
			if m.Alerts.Age != nil {
				age = "newest row " + m.Alerts.Age.Round(time.Minute).String() + " old"
			}
			stale = append(stale, fmt.Sprintf("%s: %s, more than %s", r.Experiment, age, m.Alerts.MaxStaleness))
		}
	}
	if len(stale) > 0 {
		return fmt.Errorf("%w: %s (see the readout)", errStale, strings.Join(stale, "; "))
	}
	return nil
}

// checkMonitorBoundary returns errBoundary when --exit-on-boundary was
// given and a comparison crossed its efficacy boundary.
func checkMonitorBoundary(m *monitorRun, readouts []experiment.Readout) error {
	if m == nil || !m.exitOn {
		return nil
	}
	var crossed []string
	for _, r := range readouts {
		if r.Monitoring == nil {
			continue
		}
		for _, c := range r.Monitoring.Comparisons {
			if c.CrossedAtLook > 0 {
				crossed = append(crossed, fmt.Sprintf("%s: %s, %s (%s, look %d)", r.Experiment, c.Metric, c.Treatment, c.Method, c.CrossedAtLook))
			}
		}
	}
	if len(crossed) > 0 {
		return fmt.Errorf("%w: %s (see the readout)", errBoundary, strings.Join(crossed, "; "))
	}
	return nil
}

// monitorOutcome is the exit of a written monitored readout: stale data
// (9) first, then the codes 4 to 7 of checkOutcome, then a crossed
// boundary (8).
func monitorOutcome(m *monitorRun, c outcomeChecks, readouts []experiment.Readout) error {
	if m != nil && m.settings.MaxStaleness > 0 {
		if err := checkMonitorStale(readouts); err != nil {
			return err
		}
	}
	if err := checkOutcome(c, readouts); err != nil {
		return err
	}
	return checkMonitorBoundary(m, readouts)
}

// looksChartLink is the --looks-chart file as the Markdown at out links
// it; "" without one.
func looksChartLink(m *monitorRun, out string) string {
	if m == nil || m.looksChart == "" {
		return ""
	}
	return linkPath(out, m.looksChart)
}

// writeLooksCharts adds each readout's chart over its looks to set.
func writeLooksCharts(set *report.OutputSet, m *monitorRun, readouts []experiment.Readout) error {
	if m == nil || m.looksChart == "" {
		return nil
	}
	opts := chart.Options{Format: chart.FormatOf(m.looksChart)}
	for i, r := range readouts {
		if i >= len(m.looks) {
			return fmt.Errorf("writing the chart over the looks of experiment %q: no looks were read", r.Experiment)
		}
		looks := m.looks[i]
		path := report.PerExperimentPath(m.looksChart, r.Experiment, len(readouts))
		if err := set.Add(path, func(w io.Writer) error { return chart.WriteLooks(w, r, looks, opts) }); err != nil {
			return fmt.Errorf("writing the chart over the looks of experiment %q: %w", r.Experiment, err)
		}
	}
	return nil
}

// monitorOutputs are the files a monitored run writes, for checkOutputs:
// the history file and the charts over the looks.
func monitorOutputs(run *analyzeRun) []report.OutputPath {
	m := run.monitor
	if m == nil {
		return nil
	}
	var outs []report.OutputPath
	if m.history != "" {
		outs = append(outs, report.OutputPath{From: m.historyFrom, Path: m.history})
	}
	if m.looksChart != "" {
		for _, e := range run.experiments {
			outs = append(outs, report.OutputPath{From: m.chartFrom, Path: report.PerExperimentPath(m.looksChart, e.spec.Key, len(run.experiments))})
		}
	}
	return outs
}
