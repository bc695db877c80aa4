package experiment

import (
	"cmp"
	"errors"
	"fmt"
	"slices"
	"strings"
	"time"

	"github.com/armtally/armtally/experiment/stats"
)

// Ignored-event and bad-row reasons, as the diagnostics spell them.
const (
	ReasonNotMetricEvent    = "not_metric_event"
	ReasonOtherExperiment   = "other_experiment"
	ReasonExposureOutside   = "exposure_outside_window"
	ReasonAfterWindowEnd    = "after_window_end"
	ReasonAfterAsOf         = "after_as_of"
	ReasonUnitNeverExposed  = "unit_never_exposed"
	ReasonUnitExcluded      = "unit_excluded"
	ReasonBeforeExposure    = "before_exposure"
	ReasonOutsideAttributed = "outside_attribution_window"
)

// Decision routes, as Comparison.DecidedBy and TargetTest.DecidedBy spell
// them.
const (
	DecidedByZ     = "z_test"
	DecidedByExact = "exact_test"
)

// Method names the readout carries beside the stats package's own.
const (
	methodLift = "Katz log ratio"
)

// Analyze turns a tally into a readout: per-arm rates with Wilson score
// intervals, each treatment against the control (difference with the
// Newcombe hybrid score interval, relative lift with the Katz log ratio
// interval, the pooled two-proportion z test, and Fisher's exact test where
// the normal approximation is not justified), the one-proportion z test
// against a metric's target rate (the exact binomial test where its
// condition fails), the sample ratio check against the planned split, and
// the diagnostics. It reads counts only, never rows.
//
// Every arm other than the control is compared with the control. An arm
// seen in the data but not among spec.Arms (when spec.Arms is not empty)
// is an error: the planned split and the comparisons would be wrong.
func Analyze(spec Spec, t Tally, opts AnalysisOptions) (Readout, error) {
	opts, err := opts.resolved()
	if err != nil {
		return Readout{}, err
	}
	if spec.Control == "" {
		return Readout{}, errors.New("no control arm named")
	}
	if len(t.Arms) > 0 && len(t.Arms[0].Metrics) != len(spec.Metrics) {
		return Readout{}, fmt.Errorf("tally has %d metrics, spec has %d", len(t.Arms[0].Metrics), len(spec.Metrics))
	}
	arms, err := readoutArms(spec, t)
	if err != nil {
		return Readout{}, err
	}
	if err := checkSegments(spec, arms); err != nil {
		return Readout{}, err
	}
	m := methods{single: opts.Interval, diff: opts.Difference, ni: opts.NonInferiority}
	r, err := newReadout(spec, t, opts, m)
	if err != nil {
		return Readout{}, err
	}
	if r.Arms, r.SampleRatio, err = sampleRatio(spec, arms, opts.SampleRatioThreshold); err != nil {
		return Readout{}, err
	}
	if err := analyzeMetrics(&r, spec, arms, opts.Stats, opts.Adjust, m); err != nil {
		return Readout{}, err
	}
	r.Diagnostics = diagnostics(spec, t, arms, opts)
	r.Warnings = openWindowWarnings(spec, t.Input)
	r.Verdict = NewVerdict(r)
	return r, nil
}

// newReadout returns the readout's header: the experiment, its window,
// the data freshness and the settings.
func newReadout(spec Spec, t Tally, opts AnalysisOptions, m methods) (Readout, error) {
	rateName, diffName, err := m.names()
	if err != nil {
		return Readout{}, err
	}
	so := opts.Stats
	r := Readout{
		Experiment:    spec.Key,
		ExposureEvent: spec.ExposureEvent,
		Control:       spec.Control,
		WindowStart:   utcPtr(spec.Start),
		WindowEnd:     utcPtr(spec.End),
		Settings: Settings{
			Alpha:                    so.Alpha,
			ConfidenceLevel:          so.Level,
			Alternative:              so.Alternative.String(),
			MultiArmPolicy:           spec.MultiArm.String(),
			MaturityPolicy:           spec.Maturity.String(),
			MinCount:                 so.MinCount,
			SampleRatioThreshold:     opts.SampleRatioThreshold,
			Adjustment:               opts.Adjust.String(),
			NonInferiorityMethod:     opts.NonInferiority.Name(),
			LiftIntervalMethod:       methodLift,
			IntervalMethod:           rateName,
			DifferenceIntervalMethod: diffName,
		},
	}
	if t.HasFreshness {
		f := time.Unix(0, t.Freshness).UTC()
		r.Freshness = &f
	}
	return r, nil
}

// sampleRatio returns the units of each arm with its planned and observed
// share, and the check of the units against the planned split.
func sampleRatio(spec Spec, arms []ArmTally, threshold float64) ([]ArmUnits, SampleRatio, error) {
	shares := plannedShares(spec, arms)
	var total int64
	for _, a := range arms {
		total += a.Units
	}
	units := make([]ArmUnits, len(arms))
	observed := make([]int64, len(arms))
	for i, a := range arms {
		units[i] = ArmUnits{Name: a.Name, Units: a.Units, PlannedShare: shares[i]}
		if total > 0 {
			units[i].ObservedShare = float64(a.Units) / float64(total)
		}
		observed[i] = a.Units
	}
	sr := SampleRatio{Method: "Pearson chi-square goodness of fit", PValue: 1, Threshold: threshold}
	if len(arms) < 2 || total == 0 {
		return units, sr, nil
	}
	g, err := stats.ChiSquareGoodnessOfFit(observed, shares)
	if err != nil {
		return nil, sr, fmt.Errorf("sample ratio check: %w", err)
	}
	sr.Method, sr.Statistic, sr.DF, sr.PValue = g.Method, g.Statistic, g.DF, g.PValue
	sr.Mismatch = g.PValue < threshold
	sr.Checked = true
	return units, sr, nil
}

// analyzeMetrics fills in the readout's metrics, the multiple-comparison
// adjustment of the primary family and of the secondary one, and their
// segment breakdowns.
func analyzeMetrics(r *Readout, spec Spec, arms []ArmTally, so stats.Options, adj stats.AdjustMethod, m methods) error {
	ctl := slices.IndexFunc(arms, func(a ArmTally) bool { return a.Name == spec.Control })
	for mi, mt := range spec.Metrics {
		mr, err := analyzeMetric(spec, mt, mi, arms, ctl, so, m)
		if err != nil {
			return fmt.Errorf("metric %q: %w", mt.Name, err)
		}
		r.Metrics = append(r.Metrics, mr)
	}
	mult, err := adjust(r.Metrics, Primary, adj, so, m)
	if err != nil {
		return err
	}
	r.Multiplicity = mult
	if slices.ContainsFunc(spec.Metrics, func(m Metric) bool { return m.Guardrail == nil && m.Role == Secondary }) {
		sec, err := adjust(r.Metrics, Secondary, adj, so, m)
		if err != nil {
			return err
		}
		r.SecondaryMultiplicity = &sec
	}
	r.Segmentation.Dimensions = append([]string(nil), spec.Segments...)
	if len(spec.Segments) == 0 {
		return nil
	}
	for mi, mt := range spec.Metrics {
		segs, err := analyzeSegments(spec, mi, arms, ctl, so, m)
		if err != nil {
			return fmt.Errorf("metric %q: %w", mt.Name, err)
		}
		r.Metrics[mi].Segments = segs
	}
	r.Segmentation.Tests = segmentTests(r.Metrics)
	return nil
}

// readoutArms returns the tally's arms in readout order (ArmOrder), with
// the control present (added with zero counts when the data has none),
// checking that every arm seen is planned when the spec lists arms.
func readoutArms(spec Spec, t Tally) ([]ArmTally, error) {
	arms := append([]ArmTally(nil), t.Arms...)
	if len(spec.Arms) > 0 {
		planned := make(map[string]bool, len(spec.Arms))
		for _, a := range spec.Arms {
			planned[a] = true
		}
		var unknown []string
		for _, a := range arms {
			if !planned[a.Name] {
				unknown = append(unknown, fmt.Sprintf("%q (%d units exposed)", a.Name, a.Exposed))
			}
		}
		if len(unknown) > 0 {
			return nil, fmt.Errorf("exposure rows carry arms that are not planned: %s; planned arms are %s",
				strings.Join(unknown, ", "), strings.Join(spec.Arms, ", "))
		}
	}
	if !slices.ContainsFunc(arms, func(a ArmTally) bool { return a.Name == spec.Control }) {
		arms = append(arms, ArmTally{Name: spec.Control, Metrics: make([]Count, len(spec.Metrics))})
	}
	order := ArmOrder(spec.Control, spec.Arms)
	slices.SortStableFunc(arms, func(a, b ArmTally) int { return order(a.Name, b.Name) })
	return arms, nil
}

// ArmOrder returns the comparison function of the readout's arm order,
// the same for every input shape and whatever order the data shows the
// arms in: the control first, then the planned arms in their given order,
// then any other arm by name (byte order).
func ArmOrder(control string, planned []string) func(a, b string) int {
	rank := map[string]int{control: 0}
	for _, a := range planned {
		if _, ok := rank[a]; !ok {
			rank[a] = len(rank)
		}
	}
	return func(a, b string) int {
		ra, oka := rank[a]
		rb, okb := rank[b]
		switch {
		case oka && okb:
			return cmp.Compare(ra, rb)
		case oka:
			return -1
		case okb:
			return 1
		}
		return strings.Compare(a, b)
	}
}

// plannedShares returns the planned share of each readout arm: the spec's
// split normalised to sum 1, or an equal split.
func plannedShares(spec Spec, arms []ArmTally) []float64 {
	shares := make([]float64, len(arms))
	if len(spec.Split) == 0 {
		for i := range shares {
			shares[i] = 1 / float64(len(arms))
		}
		return shares
	}
	var sum float64
	for _, s := range spec.Split {
		sum += s
	}
	byName := make(map[string]float64, len(spec.Arms))
	for i, a := range spec.Arms {
		byName[a] = spec.Split[i] / sum
	}
	for i, a := range arms {
		shares[i] = byName[a.Name]
	}
	return shares
}

func analyzeMetric(spec Spec, m Metric, mi int, arms []ArmTally, ctl int, so stats.Options, meth methods) (MetricReadout, error) {
	mr := MetricReadout{Name: m.Name, Events: append([]string(nil), m.Events...), Target: m.Target, LowerIsBetter: m.LowerIsBetter, Role: m.Role}
	if m.Guardrail != nil {
		mr.Guardrail = &Guardrail{Margin: m.Guardrail.Value, Relative: m.Guardrail.Relative}
	}
	if m.Window > 0 {
		s := int64(m.Window / time.Second)
		mr.WindowSeconds = &s
	}
	for _, a := range arms {
		c := a.Metrics[mi]
		ar, err := meth.armRate(a.Name, c, so.Level)
		if err != nil {
			return mr, err
		}
		if m.Target != nil && c.Units > 0 {
			if ar.TargetTest, err = targetTest(c, *m.Target, so); err != nil {
				return mr, fmt.Errorf("arm %q: %w", a.Name, err)
			}
		}
		mr.Arms = append(mr.Arms, ar)
	}
	for i, a := range arms {
		if i == ctl {
			continue
		}
		c, err := compare(a.Name, a.Metrics[mi], spec.Control, arms[ctl].Metrics[mi], so, meth)
		if err != nil {
			return mr, fmt.Errorf("%s vs %s: %w", a.Name, spec.Control, err)
		}
		if m.Guardrail != nil && c.Z != nil {
			ni, err := nonInferiority(a.Metrics[mi], arms[ctl].Metrics[mi], *m.Guardrail, m.LowerIsBetter, so, meth)
			if err != nil {
				return mr, fmt.Errorf("%s vs %s: non-inferiority: %w", a.Name, spec.Control, err)
			}
			c.NonInferiority = ni
		}
		mr.Comparisons = append(mr.Comparisons, c)
	}
	return mr, nil
}

// targetTest tests one arm's rate against the target p0: the
// one-proportion z test, and the exact binomial test when n p0 or
// n (1 - p0) is below the minimum count.
func targetTest(c Count, p0 float64, so stats.Options) (*TargetTest, error) {
	z, err := stats.OneProportionZTest(c.Conversions, c.Units, p0, so.Alpha, so.Alternative)
	if err != nil {
		return nil, err
	}
	// The one-proportion z test has no undefined case (its variance is
	// taken at p0), so z.Warnings is empty.
	tt := &TargetTest{Target: p0, Z: test(z)}
	ok, _ := stats.OneSampleCondition(c.Units, p0, so.MinCount)
	tt.ConditionMet = ok
	tt.Warnings = fewExpectedWarnings(c.Units, p0, so.MinCount)
	if ok {
		tt.Significant, tt.DecidedBy = z.RejectByPValue, DecidedByZ
		return tt, nil
	}
	e, err := stats.BinomialExact(c.Conversions, c.Units, p0, so.Alpha, so.Alternative)
	if err != nil {
		return nil, err
	}
	tt.Exact = exactTest(e)
	tt.Significant, tt.DecidedBy = e.Reject, DecidedByExact
	return tt, nil
}

// compare compares a treatment arm with the control on one metric.
func compare(treatment string, tc Count, control string, cc Count, so stats.Options, meth methods) (Comparison, error) {
	c := Comparison{Treatment: treatment, Control: control, IntervalAgrees: true}
	if tc.Units == 0 || cc.Units == 0 {
		return c, nil
	}
	x1, n1, x2, n2 := tc.Conversions, tc.Units, cc.Conversions, cc.Units
	p1, p2 := float64(x1)/float64(n1), float64(x2)/float64(n2)
	d := p1 - p2
	c.Difference = &d
	iv, err := meth.difference(x1, n1, x2, n2, so.Level)
	if err != nil {
		return c, err
	}
	c.DifferenceInterval = interval(iv, iv.Method)
	if x2 > 0 {
		lift := p1/p2 - 1
		c.RelativeLift = &lift
		ratio, err := stats.KatzRatio(x1, n1, x2, n2, so.Level)
		switch {
		case err == nil:
			ratio.Lower--
			ratio.Upper--
			c.LiftInterval = interval(ratio, methodLift)
		case !errors.Is(err, stats.ErrUndefined):
			return c, err
		}
	}
	z, err := stats.TwoProportionZTest(x1, n1, x2, n2, so.Alpha, so.Alternative)
	if err != nil {
		return c, err
	}
	c.Z = test(z)
	if len(z.Warnings) > 0 {
		// The pooled statistic is 0/0: no conversions, or all.
		code := WarnZAllConverted
		if x1+x2 == 0 {
			code = WarnZNoConversions
		}
		c.Warnings = append(c.Warnings, Warning{Code: code})
	}
	c.ConditionMet, _ = stats.TwoSampleCondition(x1, n1, x2, n2, so.MinCount)
	c.Warnings = append(c.Warnings, fewCountWarnings(treatment, x1, n1, control, x2, n2, so.MinCount)...)
	if c.ConditionMet {
		c.SignificantUnadjusted, c.DecidedBy = z.RejectByPValue, DecidedByZ
	} else {
		e, err := stats.FisherExact(x1, n1, x2, n2, so.Alpha, so.Alternative)
		if err != nil {
			return c, err
		}
		c.Exact = exactTest(e)
		c.SignificantUnadjusted, c.DecidedBy = e.Reject, DecidedByExact
	}
	c.Significant = c.SignificantUnadjusted
	agrees, err := intervalAgrees(c.SignificantUnadjusted, x1, n1, x2, n2, so, meth)
	if err != nil {
		return c, err
	}
	c.IntervalAgrees = agrees
	return c, nil
}

// intervalAgrees reports whether the Newcombe interval's verdict on a zero
// difference matches the test's decision. For a one-sided alternative the
// matching interval is the two-sided one at level 1 - 2 alpha, read on
// the side of the alternative.
func intervalAgrees(significant bool, x1, n1, x2, n2 int64, so stats.Options, meth methods) (bool, error) {
	level := 1 - so.Alpha
	if so.Alternative != stats.TwoSided {
		level = 1 - 2*so.Alpha
	}
	if !(level > 0 && level < 1) {
		return true, nil
	}
	iv, err := meth.difference(x1, n1, x2, n2, level)
	if err != nil {
		return false, err
	}
	var excludes bool
	switch so.Alternative {
	case stats.Greater:
		excludes = iv.Lower > 0
	case stats.Less:
		excludes = iv.Upper < 0
	default:
		excludes = iv.Lower > 0 || iv.Upper < 0
	}
	return excludes == significant, nil
}

func diagnostics(spec Spec, t Tally, arms []ArmTally, opts AnalysisOptions) Diagnostics {
	td := t.Diag
	d := Diagnostics{
		Input:         t.Input.String(),
		RowsRead:      td.RowsRead,
		BadRows:       append([]ReasonCount(nil), opts.BadRows...),
		ExposureRows:  td.ExposureRows,
		UnitsExposed:  td.UnitsExposed,
		MultiArmUnits: td.MultiArmUnits,
		TiedUnits:     td.TiedUnits,
	}
	if opts.RowsRead > 0 {
		d.RowsRead = opts.RowsRead
	}
	for _, a := range arms {
		d.UnitsPerArm = append(d.UnitsPerArm, ArmCount{Arm: a.Name, Units: a.Units})
	}
	for mi, m := range spec.Metrics {
		var n int64
		for _, a := range arms {
			n += a.Metrics[mi].Immature
		}
		d.Immature = append(d.Immature, MetricCount{Metric: m.Name, Units: n})
	}
	var outside int64
	for _, n := range td.OutsideAttribution {
		outside += n
	}
	for _, rc := range []ReasonCount{
		{ReasonNotMetricEvent, td.NotMetricEvents},
		{ReasonOtherExperiment, td.OtherExperimentRows},
		{ReasonExposureOutside, td.ExposuresOutsideWindow},
		{ReasonAfterWindowEnd, td.AfterWindowEnd},
		{ReasonAfterAsOf, td.AfterAsOf},
		{ReasonUnitNeverExposed, td.UnitNeverExposed},
		{ReasonUnitExcluded, td.UnitExcluded},
		{ReasonBeforeExposure, td.BeforeExposure},
		{ReasonOutsideAttributed, outside},
	} {
		if rc.Count > 0 {
			d.IgnoredEvents = append(d.IgnoredEvents, rc)
		}
	}
	return d
}

func interval(iv stats.Interval, method string) *Interval {
	return &Interval{Lower: iv.Lower, Upper: iv.Upper, Level: iv.Level, Method: method}
}

func test(z stats.ZTest) *Test {
	return &Test{
		Method: z.Method, Statistic: z.Statistic, CriticalValue: z.CriticalValue, PValue: z.PValue,
		Alpha: z.Alpha, Alternative: z.Alternative.String(),
		RejectByStatistic: z.RejectByStatistic, RejectByPValue: z.RejectByPValue,
	}
}

func exactTest(e stats.ExactTest) *ExactTest {
	return &ExactTest{Method: e.Method, PValue: e.PValue, Alpha: e.Alpha, Alternative: e.Alternative.String(), Reject: e.Reject}
}

func utcPtr(t *time.Time) *time.Time {
	if t == nil {
		return nil
	}
	u := t.UTC()
	return &u
}
