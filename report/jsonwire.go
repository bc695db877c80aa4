// The JSON wire format: the field names of every object of the JSON
// readout, in output order, and the conversion from the experiment types.
// experiment.Readout carries no JSON names; this file is their one home,
// and schema/readout.schema.json describes the same layout. Each JSONX
// type is the JSON form of experiment.X (JSONMetric of MetricReadout,
// JSONSegment of SegmentResult), with the same fields in the same order:
// see there for what each field means. Warnings are {code, text} objects
// (notices.go); the status objects are the verdict (experiment.Verdict).

package report

import (
	"time"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/ingest/safetext"
)

// Document is the top level of the JSON output: the schema it follows and
// the readouts, in the order given to WriteJSON. Decoding the output of
// WriteJSON into a Document gives back what NewDocument built.
type Document struct {
	Schema        string        `json:"schema"`
	SchemaVersion string        `json:"schema_version"`
	Status        JSONRunStatus `json:"status"`
	Readouts      []JSONReadout `json:"readouts"`
}

// JSONRunStatus is the status of a run for a scheduler: the most urgent
// readout decision (experiment.MostUrgent: fix_data, stop, ship, wait)
// and how many readouts took each decision.
type JSONRunStatus struct {
	Decision string             `json:"decision"`
	Readouts int                `json:"readouts"`
	Counts   JSONDecisionCounts `json:"decisions"`
}

// JSONDecisionCounts counts the readouts of a run by decision.
type JSONDecisionCounts struct {
	Ship    int `json:"ship"`
	Stop    int `json:"stop"`
	Wait    int `json:"wait"`
	FixData int `json:"fix_data"`
}

func runStatus(readouts []experiment.Readout) JSONRunStatus {
	st := JSONRunStatus{Readouts: len(readouts)}
	var ds []experiment.Decision
	for _, r := range readouts {
		d := readoutVerdict(r).Decision
		ds = append(ds, d)
		switch d {
		case experiment.DecisionShip:
			st.Counts.Ship++
		case experiment.DecisionStop:
			st.Counts.Stop++
		case experiment.DecisionFixData:
			st.Counts.FixData++
		default:
			st.Counts.Wait++
		}
	}
	st.Decision = experiment.MostUrgent(ds).String()
	return st
}

// NewDocument converts readouts to their JSON form. The readouts are not
// modified: every slice is a new one, empty rather than nil (so that the
// JSON holds [] rather than null), every time is in UTC (so that the same
// instants give the same bytes) and every warning is its English text.
//
// Every name from the data (experiment key, exposure event, arm, metric
// and event names, segment dimensions and values) and every warning text
// is in its JSON form (jsonText): as it is when it is valid UTF-8 without
// a backslash followed by "x", else with each backslash doubled and each
// byte that is not UTF-8 as \xNN, so that names that differ stay
// different.
func NewDocument(readouts []experiment.Readout) Document {
	return Document{Schema: SchemaID, SchemaVersion: SchemaVersion, Status: runStatus(readouts),
		Readouts: convertAll(readouts, toJSONReadout)}
}

// JSONReadout is the JSON form of experiment.Readout.
type JSONReadout struct {
	Experiment    string             `json:"experiment"`
	Status        JSONStatus         `json:"status"`
	ExposureEvent string             `json:"exposure_event"`
	Control       string             `json:"control"`
	WindowStart   *time.Time         `json:"window_start"`
	WindowEnd     *time.Time         `json:"window_end"`
	Freshness     *time.Time         `json:"data_freshness"`
	Settings      JSONSettings       `json:"settings"`
	Arms          []JSONArmUnits     `json:"arms"`
	SampleRatio   JSONSampleRatio    `json:"sample_ratio"`
	Multiplicity  []JSONMultiplicity `json:"multiple_comparisons"`
	Segmentation  JSONSegmentation   `json:"segmentation"`
	Metrics       []JSONMetric       `json:"metrics"`
	Diagnostics   JSONDiagnostics    `json:"diagnostics"`
	Warnings      []JSONNotice       `json:"warnings"`
	// Monitoring is present only in a monitored run (--sequential,
	// --history, --as-of, --max-staleness).
	Monitoring *JSONMonitoring `json:"monitoring,omitempty"`
}

func toJSONReadout(r experiment.Readout) JSONReadout {
	seg := JSONSegmentation{
		Dimensions: convertAll(r.Segmentation.Dimensions, jsonText),
		Tests:      r.Segmentation.Tests,
		Caution:    segmentCaution(r),
	}
	return JSONReadout{
		Experiment:    jsonText(r.Experiment),
		Status:        toJSONStatus(r),
		ExposureEvent: jsonText(r.ExposureEvent),
		Control:       jsonText(r.Control),
		WindowStart:   utc(r.WindowStart),
		WindowEnd:     utc(r.WindowEnd),
		Freshness:     utc(r.Freshness),
		Settings:      JSONSettings(r.Settings),
		Arms:          convertAll(r.Arms, toJSONArmUnits),
		SampleRatio:   JSONSampleRatio(r.SampleRatio),
		Multiplicity:  convertAll(r.Families(), toJSONMultiplicity),
		Segmentation:  seg,
		Metrics:       convertAll(r.Metrics, toJSONMetric),
		Diagnostics:   toJSONDiagnostics(r.Diagnostics),
		Warnings:      jsonNotices(readoutNotices(r, plainNotices)),
		Monitoring:    toJSONMonitoring(r.Monitoring),
	}
}

// jsonText is the JSON form of a name or text from the data
// (safetext.Exact): valid names without a backslash followed by "x" come
// out as they are, and no two different names give the same text.
func jsonText(s string) string { return safetext.Exact(s) }

// JSONNotice is one warning: its stable code, its text and, for a
// warning about one metric, the metric's name.
type JSONNotice struct {
	Code   string  `json:"code"`
	Text   string  `json:"text"`
	Metric *string `json:"metric"`
}

// jsonNotices puts notices in their JSON form: a text may hold names
// from the data.
func jsonNotices(list []Notice) []JSONNotice {
	return convertAll(list, func(n Notice) JSONNotice {
		j := JSONNotice{Code: n.Code, Text: jsonText(oneLine(n.Text))}
		if n.Metric != "" {
			m := jsonText(n.Metric)
			j.Metric = &m
		}
		return j
	})
}

// jsonTestNotices is the JSON form of a test's notes (testNotices).
func jsonTestNotices(z *experiment.Test, ws []experiment.Warning) []JSONNotice {
	return jsonNotices(testNotices(z, ws))
}

// JSONStatus is the verdict of a readout (experiment.Verdict): the
// decision, the treatments it names, the reason codes, each treatment's
// decision, and one row per treatment and metric in summary order
// (primary, secondary, guardrail) with the numbers that back it.
type JSONStatus struct {
	Decision     string                `json:"decision"`
	Treatments   []string              `json:"treatments"`
	Reasons      []string              `json:"reasons"`
	PerTreatment []JSONTreatmentStatus `json:"treatment_decisions"`
	Rows         []JSONStatusRow       `json:"rows"`
}

// JSONTreatmentStatus is experiment.TreatmentVerdict.
type JSONTreatmentStatus struct {
	Treatment string   `json:"treatment"`
	Decision  string   `json:"decision"`
	Reasons   []string `json:"reasons"`
}

// JSONStatusRow is one row of the summary: a treatment on a metric, its
// outcome, and the numbers of its comparison (the adjusted p-value is
// null outside the families).
type JSONStatusRow struct {
	Metric             string        `json:"metric"`
	Role               string        `json:"role"`
	Treatment          string        `json:"treatment"`
	Outcome            string        `json:"outcome"`
	Difference         *float64      `json:"difference"`
	DifferenceInterval *JSONInterval `json:"difference_interval"`
	RelativeLift       *float64      `json:"relative_lift"`
	AdjustedPValue     *float64      `json:"adjusted_p_value"`
}

// readoutVerdict is the readout's verdict; a readout built by hand, whose
// Verdict was never set (Analyze sets it), gets experiment.NewVerdict's.
func readoutVerdict(r experiment.Readout) experiment.Verdict {
	if r.Verdict.Decision == 0 {
		return experiment.NewVerdict(r)
	}
	return r.Verdict
}

// verdictComparison returns the comparison a verdict row points at; false
// when the row's indexes do not fit the readout (a verdict set by hand).
func verdictComparison(r experiment.Readout, row experiment.VerdictRow) (experiment.Comparison, bool) {
	if row.MetricIndex < 0 || row.MetricIndex >= len(r.Metrics) {
		return experiment.Comparison{}, false
	}
	cs := r.Metrics[row.MetricIndex].Comparisons
	if row.ComparisonIndex < 0 || row.ComparisonIndex >= len(cs) {
		return experiment.Comparison{}, false
	}
	return cs[row.ComparisonIndex], true
}

func toJSONStatus(r experiment.Readout) JSONStatus {
	v := readoutVerdict(r)
	reasons := func(rs []experiment.Reason) []string {
		return convertAll(rs, experiment.Reason.String)
	}
	st := JSONStatus{
		Decision:   v.Decision.String(),
		Treatments: convertAll(v.Treatments, jsonText),
		Reasons:    reasons(v.Reasons),
		PerTreatment: convertAll(v.PerTreatment, func(t experiment.TreatmentVerdict) JSONTreatmentStatus {
			return JSONTreatmentStatus{Treatment: jsonText(t.Treatment), Decision: t.Decision.String(), Reasons: reasons(t.Reasons)}
		}),
	}
	st.Rows = convertAll(v.Rows, func(row experiment.VerdictRow) JSONStatusRow {
		j := JSONStatusRow{Metric: jsonText(row.Metric), Role: row.RoleName(), Treatment: jsonText(row.Treatment),
			Outcome: row.Outcome.String()}
		c, ok := verdictComparison(r, row)
		if !ok {
			return j
		}
		j.Difference, j.DifferenceInterval, j.RelativeLift = c.Difference, toJSONInterval(c.DifferenceInterval), c.RelativeLift
		if c.Adjusted != nil {
			p := c.Adjusted.PValue
			j.AdjustedPValue = &p
		}
		return j
	})
	return st
}

// JSONSettings is the JSON form of experiment.Settings.
type JSONSettings struct {
	Alpha                    float64 `json:"alpha"`
	ConfidenceLevel          float64 `json:"confidence_level"`
	Alternative              string  `json:"alternative"`
	MultiArmPolicy           string  `json:"multi_arm_policy"`
	MaturityPolicy           string  `json:"maturity_policy"`
	MinCount                 int64   `json:"min_count"`
	SampleRatioThreshold     float64 `json:"sample_ratio_threshold"`
	IntervalMethod           string  `json:"interval_method"`
	DifferenceIntervalMethod string  `json:"difference_interval_method"`
	LiftIntervalMethod       string  `json:"lift_interval_method"`
	Adjustment               string  `json:"adjustment"`
	NonInferiorityMethod     string  `json:"non_inferiority_method"`
}

// JSONMultiplicity is the JSON form of experiment.Multiplicity: one
// family of comparisons adjusted together, "primary" (the confirmatory
// family) or "secondary".
type JSONMultiplicity struct {
	Family      string `json:"family"`
	Method      string `json:"method"`
	ErrorRate   string `json:"error_rate"`
	Description string `json:"description"`
	Size        int    `json:"family_size"`
}

func toJSONMultiplicity(m experiment.Multiplicity) JSONMultiplicity {
	return JSONMultiplicity{Family: m.Role.String(), Method: m.Method, ErrorRate: m.ErrorRate, Description: m.Family, Size: m.Size}
}

// JSONArmUnits is the JSON form of experiment.ArmUnits; the arm's name
// is "arm", as everywhere in the JSON.
type JSONArmUnits struct {
	Arm           string  `json:"arm"`
	Units         int64   `json:"units"`
	PlannedShare  float64 `json:"planned_share"`
	ObservedShare float64 `json:"observed_share"`
}

func toJSONArmUnits(a experiment.ArmUnits) JSONArmUnits {
	return JSONArmUnits{Arm: jsonText(a.Name), Units: a.Units, PlannedShare: a.PlannedShare, ObservedShare: a.ObservedShare}
}

// JSONSampleRatio is the JSON form of experiment.SampleRatio.
type JSONSampleRatio struct {
	Method    string  `json:"method"`
	Statistic float64 `json:"statistic"`
	DF        int     `json:"df"`
	PValue    float64 `json:"p_value"`
	Threshold float64 `json:"threshold"`
	Mismatch  bool    `json:"mismatch"`
	Checked   bool    `json:"checked"`
}

// JSONSegmentation is the JSON form of experiment.Segmentation, with the
// caution that goes with segment results ("" when there are none).
type JSONSegmentation struct {
	Dimensions []string `json:"dimensions"`
	Tests      int      `json:"tests"`
	Caution    string   `json:"caution"`
}

// JSONMetric is the JSON form of experiment.MetricReadout.
type JSONMetric struct {
	Name          string           `json:"name"`
	Role          string           `json:"role"`
	Events        []string         `json:"events"`
	WindowSeconds *int64           `json:"window_seconds"`
	Target        *float64         `json:"target_rate"`
	LowerIsBetter bool             `json:"lower_is_better"`
	Guardrail     *JSONGuardrail   `json:"guardrail"`
	Arms          []JSONArmRate    `json:"arms"`
	Comparisons   []JSONComparison `json:"comparisons"`
	Segments      []JSONSegment    `json:"segments"`
	Warnings      []JSONNotice     `json:"warnings"`
}

func toJSONMetric(m experiment.MetricReadout) JSONMetric {
	return JSONMetric{
		Name:          jsonText(m.Name),
		Role:          m.RoleName(),
		Events:        convertAll(m.Events, jsonText),
		WindowSeconds: m.WindowSeconds,
		Target:        m.Target,
		LowerIsBetter: m.LowerIsBetter,
		Guardrail:     convertPtr(m.Guardrail, func(g experiment.Guardrail) JSONGuardrail { return JSONGuardrail(g) }),
		Arms:          convertAll(m.Arms, toJSONArmRate),
		Comparisons:   convertAll(m.Comparisons, toJSONComparison),
		Segments:      convertAll(m.Segments, toJSONSegment),
		Warnings:      jsonTestNotices(nil, m.Warnings),
	}
}

// JSONSegment is the JSON form of experiment.SegmentResult.
type JSONSegment struct {
	Dimension   string           `json:"dimension"`
	Value       *string          `json:"value"`
	Exploratory bool             `json:"exploratory"`
	Arms        []JSONArmRate    `json:"arms"`
	Comparisons []JSONComparison `json:"comparisons"`
}

func toJSONSegment(s experiment.SegmentResult) JSONSegment {
	return JSONSegment{
		Dimension:   jsonText(s.Dimension),
		Value:       convertPtr(s.Value, jsonText),
		Exploratory: s.Exploratory,
		Arms:        convertAll(s.Arms, toJSONArmRate),
		Comparisons: convertAll(s.Comparisons, toJSONComparison),
	}
}

// JSONGuardrail is the JSON form of experiment.Guardrail.
type JSONGuardrail struct {
	Margin   float64 `json:"margin"`
	Relative bool    `json:"relative"`
}

// JSONArmRate is the JSON form of experiment.ArmRate; target_test is
// left out when the metric has no target.
type JSONArmRate struct {
	Arm         string          `json:"arm"`
	Units       int64           `json:"units"`
	Conversions int64           `json:"conversions"`
	Immature    int64           `json:"immature_units"`
	Rate        *float64        `json:"rate"`
	Interval    *JSONInterval   `json:"interval"`
	TargetTest  *JSONTargetTest `json:"target_test,omitempty"`
}

func toJSONArmRate(a experiment.ArmRate) JSONArmRate {
	return JSONArmRate{
		Arm:         jsonText(a.Arm),
		Units:       a.Units,
		Conversions: a.Conversions,
		Immature:    a.Immature,
		Rate:        a.Rate,
		Interval:    toJSONInterval(a.Interval),
		TargetTest:  convertPtr(a.TargetTest, toJSONTargetTest),
	}
}

// JSONInterval is the JSON form of experiment.Interval.
type JSONInterval struct {
	Lower  float64 `json:"lower"`
	Upper  float64 `json:"upper"`
	Level  float64 `json:"level"`
	Method string  `json:"method"`
}

func toJSONInterval(iv *experiment.Interval) *JSONInterval {
	return convertPtr(iv, func(iv experiment.Interval) JSONInterval { return JSONInterval(iv) })
}

// JSONTest is the JSON form of experiment.Test.
type JSONTest struct {
	Method            string  `json:"method"`
	Statistic         float64 `json:"statistic"`
	CriticalValue     float64 `json:"critical_value"`
	PValue            float64 `json:"p_value"`
	Alpha             float64 `json:"alpha"`
	Alternative       string  `json:"alternative"`
	RejectByStatistic bool    `json:"reject_by_statistic"`
	RejectByPValue    bool    `json:"reject_by_p_value"`
}

func toJSONTest(t *experiment.Test) *JSONTest {
	return convertPtr(t, func(t experiment.Test) JSONTest { return JSONTest(t) })
}

// JSONExactTest is the JSON form of experiment.ExactTest.
type JSONExactTest struct {
	Method      string  `json:"method"`
	PValue      float64 `json:"p_value"`
	Alpha       float64 `json:"alpha"`
	Alternative string  `json:"alternative"`
	Reject      bool    `json:"reject"`
}

func toJSONExactTest(e *experiment.ExactTest) *JSONExactTest {
	return convertPtr(e, func(e experiment.ExactTest) JSONExactTest { return JSONExactTest(e) })
}

// JSONTargetTest is the JSON form of experiment.TargetTest.
type JSONTargetTest struct {
	Target       float64        `json:"target_rate"`
	Z            *JSONTest      `json:"z_test"`
	ConditionMet bool           `json:"condition_met"`
	Exact        *JSONExactTest `json:"exact_test"`
	Significant  bool           `json:"significant"`
	DecidedBy    string         `json:"decided_by"`
	Warnings     []JSONNotice   `json:"warnings"`
}

func toJSONTargetTest(t experiment.TargetTest) JSONTargetTest {
	return JSONTargetTest{
		Target:       t.Target,
		Z:            toJSONTest(t.Z),
		ConditionMet: t.ConditionMet,
		Exact:        toJSONExactTest(t.Exact),
		Significant:  t.Significant,
		DecidedBy:    t.DecidedBy,
		Warnings:     jsonTestNotices(t.Z, t.Warnings),
	}
}

// JSONComparison is the JSON form of experiment.Comparison.
type JSONComparison struct {
	Treatment             string                  `json:"treatment"`
	Control               string                  `json:"control"`
	Difference            *float64                `json:"difference"`
	DifferenceInterval    *JSONInterval           `json:"difference_interval"`
	RelativeLift          *float64                `json:"relative_lift"`
	LiftInterval          *JSONInterval           `json:"relative_lift_interval"`
	Z                     *JSONTest               `json:"z_test"`
	ConditionMet          bool                    `json:"condition_met"`
	Exact                 *JSONExactTest          `json:"exact_test"`
	SignificantUnadjusted bool                    `json:"significant_unadjusted"`
	Significant           bool                    `json:"significant"`
	DecidedBy             string                  `json:"decided_by"`
	Adjusted              *JSONAdjusted           `json:"adjusted"`
	IntervalAgrees        bool                    `json:"interval_agrees"`
	NonInferiority        *JSONNonInferiorityTest `json:"non_inferiority"`
	Warnings              []JSONNotice            `json:"warnings"`
}

func toJSONComparison(c experiment.Comparison) JSONComparison {
	return JSONComparison{
		Treatment:             jsonText(c.Treatment),
		Control:               jsonText(c.Control),
		Difference:            c.Difference,
		DifferenceInterval:    toJSONInterval(c.DifferenceInterval),
		RelativeLift:          c.RelativeLift,
		LiftInterval:          toJSONInterval(c.LiftInterval),
		Z:                     toJSONTest(c.Z),
		ConditionMet:          c.ConditionMet,
		Exact:                 toJSONExactTest(c.Exact),
		SignificantUnadjusted: c.SignificantUnadjusted,
		Significant:           c.Significant,
		DecidedBy:             c.DecidedBy,
		Adjusted:              convertPtr(c.Adjusted, toJSONAdjusted),
		IntervalAgrees:        c.IntervalAgrees,
		NonInferiority:        convertPtr(c.NonInferiority, toJSONNonInferiority),
		Warnings:              jsonTestNotices(c.Z, c.Warnings),
	}
}

// JSONAdjusted is the JSON form of experiment.Adjusted.
type JSONAdjusted struct {
	Family             string        `json:"family"`
	Method             string        `json:"method"`
	FamilySize         int           `json:"family_size"`
	PValue             float64       `json:"p_value"`
	Significant        bool          `json:"significant"`
	DifferenceInterval *JSONInterval `json:"difference_interval"`
}

func toJSONAdjusted(a experiment.Adjusted) JSONAdjusted {
	return JSONAdjusted{
		Family:             a.Family.String(),
		Method:             a.Method,
		FamilySize:         a.FamilySize,
		PValue:             a.PValue,
		Significant:        a.Significant,
		DifferenceInterval: toJSONInterval(a.DifferenceInterval),
	}
}

// JSONNonInferiorityTest is the JSON form of experiment.NonInferiorityTest.
type JSONNonInferiorityTest struct {
	AbsoluteMargin float64       `json:"absolute_margin"`
	Z              *JSONTest     `json:"z_test"`
	NonInferior    bool          `json:"non_inferior"`
	Interval       *JSONInterval `json:"interval"`
	Warnings       []JSONNotice  `json:"warnings"`
}

func toJSONNonInferiority(n experiment.NonInferiorityTest) JSONNonInferiorityTest {
	return JSONNonInferiorityTest{
		AbsoluteMargin: n.AbsoluteMargin,
		Z:              toJSONTest(n.Z),
		NonInferior:    n.NonInferior,
		Interval:       toJSONInterval(n.Interval),
		Warnings:       jsonTestNotices(n.Z, n.Warnings),
	}
}

// JSONDiagnostics is the JSON form of experiment.Diagnostics.
type JSONDiagnostics struct {
	Input         string            `json:"input"`
	RowsRead      int64             `json:"rows_read"`
	BadRows       []JSONReasonCount `json:"bad_rows"`
	ExposureRows  int64             `json:"exposure_rows"`
	UnitsExposed  int64             `json:"units_exposed"`
	MultiArmUnits int64             `json:"multi_arm_units"`
	TiedUnits     int64             `json:"tied_units"`
	UnitsPerArm   []JSONArmCount    `json:"units_per_arm"`
	Immature      []JSONMetricCount `json:"immature_units"`
	IgnoredEvents []JSONReasonCount `json:"ignored_events"`
}

func toJSONDiagnostics(d experiment.Diagnostics) JSONDiagnostics {
	reasons := func(rc experiment.ReasonCount) JSONReasonCount { return JSONReasonCount(rc) }
	return JSONDiagnostics{
		Input:         d.Input,
		RowsRead:      d.RowsRead,
		BadRows:       convertAll(d.BadRows, reasons),
		ExposureRows:  d.ExposureRows,
		UnitsExposed:  d.UnitsExposed,
		MultiArmUnits: d.MultiArmUnits,
		TiedUnits:     d.TiedUnits,
		UnitsPerArm:   convertAll(d.UnitsPerArm, toJSONArmCount),
		Immature:      convertAll(d.Immature, toJSONMetricCount),
		IgnoredEvents: convertAll(d.IgnoredEvents, reasons),
	}
}

// JSONReasonCount is the JSON form of experiment.ReasonCount.
type JSONReasonCount struct {
	Reason string `json:"reason"`
	Count  int64  `json:"count"`
}

// JSONArmCount is the JSON form of experiment.ArmCount.
type JSONArmCount struct {
	Arm   string `json:"arm"`
	Units int64  `json:"units"`
}

// JSONMetricCount is the JSON form of experiment.MetricCount.
type JSONMetricCount struct {
	Metric string `json:"metric"`
	Units  int64  `json:"units"`
}

func toJSONArmCount(a experiment.ArmCount) JSONArmCount {
	return JSONArmCount{Arm: jsonText(a.Arm), Units: a.Units}
}

func toJSONMetricCount(m experiment.MetricCount) JSONMetricCount {
	return JSONMetricCount{Metric: jsonText(m.Metric), Units: m.Units}
}

// convertAll returns f of each element of s, in a new slice that is never
// nil.
func convertAll[T, U any](s []T, f func(T) U) []U {
	out := make([]U, len(s))
	for i, v := range s {
		out[i] = f(v)
	}
	return out
}

// convertPtr returns a pointer to f of *p, or nil for a nil p.
func convertPtr[T, U any](p *T, f func(T) U) *U {
	if p == nil {
		return nil
	}
	u := f(*p)
	return &u
}

func utc(t *time.Time) *time.Time {
	if t == nil {
		return nil
	}
	u := t.UTC()
	return &u
}
