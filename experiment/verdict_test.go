package experiment

import (
	"reflect"
	"slices"
	"strings"
	"testing"
)

func TestRoleParse(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want Role
		ok   bool
	}{
		{"primary", Primary, true},
		{"secondary", Secondary, true},
		{"guardrail", 0, false}, // a guardrail is a margin, not a Role
		{"Primary", 0, false},
		{"", 0, false},
	} {
		got, err := ParseRole(tc.in)
		if (err == nil) != tc.ok || (tc.ok && got != tc.want) {
			t.Errorf("ParseRole(%q) = %v, %v", tc.in, got, err)
		}
		if tc.ok && got.String() != tc.in {
			t.Errorf("%v.String() = %q, want %q", got, got.String(), tc.in)
		}
	}
	if Role(7).Valid() || Role(7).String() != "Role(7)" {
		t.Errorf("Role(7): valid %v, %q", Role(7).Valid(), Role(7).String())
	}
}

// The codes are an interface (JSON, exit codes): every constant has its
// own code, as the issue names them.
func TestVerdictCodes(t *testing.T) {
	codes := map[string]string{}
	for _, tc := range []struct{ got, want string }{
		{OutcomeBetter.String(), "better"},
		{OutcomeWorse.String(), "worse"},
		{OutcomeNoDetectableDifference.String(), "no_detectable_difference"},
		{OutcomeGuardrailHeld.String(), "guardrail_held"},
		{OutcomeGuardrailNotShown.String(), "guardrail_not_shown"},
		{OutcomeCheckFailed.String(), "check_failed"},
		{OutcomeNotEnoughData.String(), "not_enough_data"},
		{Outcome(0).String(), "Outcome(0)"},
		{DecisionShip.String(), "ship"},
		{DecisionStop.String(), "stop"},
		{DecisionWait.String(), "wait"},
		{DecisionFixData.String(), "fix_data"},
		{Decision(0).String(), "Decision(0)"},
		{ReasonSampleRatioMismatch.String(), "sample_ratio_mismatch"},
		{ReasonPrimaryBetter.String(), "primary_better"},
		{ReasonGuardrailsHeld.String(), "guardrails_held"},
		{ReasonPrimaryWorse.String(), "primary_worse"},
		{ReasonGuardrailWorse.String(), "guardrail_worse"},
		{ReasonNoPrimaryDifference.String(), "no_primary_difference"},
		{ReasonGuardrailNotShown.String(), "guardrail_not_shown"},
		{ReasonNotEnoughData.String(), "not_enough_data"},
		{Reason(99).String(), "Reason(99)"},
	} {
		if tc.got != tc.want {
			t.Errorf("code %q, want %q", tc.got, tc.want)
		}
	}
	for o := OutcomeBetter; o <= OutcomeNotEnoughData; o++ {
		if prev, dup := codes[o.String()]; dup {
			t.Errorf("outcome code %q twice (%s)", o, prev)
		}
		codes[o.String()] = "outcome"
	}
}

// cmpRow is a hand-made comparison for the rule tests: a difference, the
// reported and unadjusted decisions and, for a guardrail, the
// non-inferiority decision (ni: 0 none, 1 held, 2 not shown).
func cmpRow(treatment string, d float64, sig, unadj bool, ni int) Comparison {
	c := Comparison{Treatment: treatment, Control: "control", Difference: &d, Z: &Test{},
		Significant: sig, SignificantUnadjusted: unadj}
	if ni > 0 {
		c.NonInferiority = &NonInferiorityTest{NonInferior: ni == 1}
	}
	return c
}

// untested is a comparison with an arm without units: no test.
func untested(treatment string) Comparison {
	return Comparison{Treatment: treatment, Control: "control"}
}

// The rules of the verdict (issue 12), on hand-made readouts: the values
// are the rules' own, common practice, not numbers.
func TestVerdictRules(t *testing.T) {
	arms := []ArmUnits{{Name: "control"}, {Name: "a"}, {Name: "b"}}
	guard := &Guardrail{Margin: 0.01}
	type want struct {
		outcomes  string // row outcomes in summary order, "metric/treatment=outcome" joined by spaces
		per       string // "treatment=decision:reason,reason" joined by spaces
		decision  Decision
		names     []string
		reasonSet []Reason
	}
	cases := []struct {
		name     string
		metrics  []MetricReadout
		mismatch bool
		want     want
	}{
		{
			name: "one primary better, guardrail held: ship",
			metrics: []MetricReadout{
				{Name: "buy", Comparisons: []Comparison{cmpRow("a", 0.02, true, true, 0), cmpRow("b", 0.001, false, false, 0)}},
				{Name: "refund", Guardrail: guard, Comparisons: []Comparison{cmpRow("a", 0, false, false, 1), cmpRow("b", 0, false, false, 1)}},
			},
			want: want{
				outcomes: "buy/a=better buy/b=no_detectable_difference refund/a=guardrail_held refund/b=guardrail_held",
				per:      "a=ship:primary_better,guardrails_held b=wait:no_primary_difference",
				decision: DecisionShip, names: []string{"a"}, reasonSet: []Reason{ReasonPrimaryBetter, ReasonGuardrailsHeld},
			},
		},
		{
			name: "ship beats stop in the readout decision",
			metrics: []MetricReadout{
				{Name: "buy", Comparisons: []Comparison{cmpRow("a", -0.02, true, true, 0), cmpRow("b", 0.02, true, true, 0)}},
			},
			want: want{
				outcomes: "buy/a=worse buy/b=better",
				per:      "a=stop:primary_worse b=ship:primary_better",
				decision: DecisionShip, names: []string{"b"}, reasonSet: []Reason{ReasonPrimaryBetter},
			},
		},
		{
			name: "lower is better flips the direction",
			metrics: []MetricReadout{
				{Name: "churn", LowerIsBetter: true, Comparisons: []Comparison{cmpRow("a", -0.02, true, true, 0), cmpRow("b", 0.02, true, true, 0)}},
			},
			want: want{
				outcomes: "churn/a=better churn/b=worse",
				per:      "a=ship:primary_better b=stop:primary_worse",
				decision: DecisionShip, names: []string{"a"}, reasonSet: []Reason{ReasonPrimaryBetter},
			},
		},
		{
			name: "significant only before adjustment is no detectable difference",
			metrics: []MetricReadout{
				{Name: "buy", Comparisons: []Comparison{cmpRow("a", 0.02, false, true, 0), cmpRow("b", -0.02, false, true, 0)}},
			},
			want: want{
				outcomes: "buy/a=no_detectable_difference buy/b=no_detectable_difference",
				per:      "a=wait:no_primary_difference b=wait:no_primary_difference",
				decision: DecisionWait, names: []string{"a", "b"}, reasonSet: []Reason{ReasonNoPrimaryDifference},
			},
		},
		{
			name: "guardrail worse by its unadjusted test stops; not shown waits",
			metrics: []MetricReadout{
				{Name: "buy", Comparisons: []Comparison{cmpRow("a", 0.02, true, true, 0), cmpRow("b", 0.02, true, true, 0)}},
				{Name: "refund", LowerIsBetter: true, Guardrail: guard,
					Comparisons: []Comparison{cmpRow("a", 0.03, true, true, 2), cmpRow("b", 0.003, false, false, 2)}},
			},
			want: want{
				outcomes: "buy/a=better buy/b=better refund/a=worse refund/b=guardrail_not_shown",
				per:      "a=stop:guardrail_worse b=wait:guardrail_not_shown",
				decision: DecisionStop, names: []string{"a"}, reasonSet: []Reason{ReasonGuardrailWorse},
			},
		},
		{
			name: "a guardrail significant in the good direction is not worse",
			metrics: []MetricReadout{
				{Name: "buy", Comparisons: []Comparison{cmpRow("a", 0.0, false, false, 0), cmpRow("b", 0, false, false, 0)}},
				{Name: "refund", Guardrail: guard, Comparisons: []Comparison{cmpRow("a", 0.03, true, true, 2), untested("b")}},
			},
			want: want{
				outcomes: "buy/a=no_detectable_difference buy/b=no_detectable_difference refund/a=guardrail_not_shown refund/b=not_enough_data",
				per:      "a=wait:no_primary_difference,guardrail_not_shown b=wait:no_primary_difference,not_enough_data",
				decision: DecisionWait, names: []string{"a", "b"},
				reasonSet: []Reason{ReasonNoPrimaryDifference, ReasonGuardrailNotShown, ReasonNotEnoughData},
			},
		},
		{
			name: "secondary metrics never change a decision; rows come primary, secondary, guardrail",
			metrics: []MetricReadout{
				{Name: "refund", Guardrail: guard, Comparisons: []Comparison{cmpRow("a", 0, false, false, 1), cmpRow("b", 0, false, false, 1)}},
				{Name: "share", Role: Secondary, Comparisons: []Comparison{cmpRow("a", -0.05, true, true, 0), cmpRow("b", 0.05, true, true, 0)}},
				{Name: "buy", Comparisons: []Comparison{cmpRow("a", 0.02, true, true, 0), untested("b")}},
			},
			want: want{
				outcomes: "buy/a=better buy/b=not_enough_data share/a=worse share/b=better refund/a=guardrail_held refund/b=guardrail_held",
				per:      "a=ship:primary_better,guardrails_held b=wait:not_enough_data",
				decision: DecisionShip, names: []string{"a"}, reasonSet: []Reason{ReasonPrimaryBetter, ReasonGuardrailsHeld},
			},
		},
		{
			name: "a primary better with a guardrail not shown waits",
			metrics: []MetricReadout{
				{Name: "buy", Comparisons: []Comparison{cmpRow("a", 0.02, true, true, 0), cmpRow("b", 0.02, true, true, 0)}},
				{Name: "refund", Guardrail: guard, Comparisons: []Comparison{cmpRow("a", 0, false, false, 2), cmpRow("b", 0, false, false, 1)}},
			},
			want: want{
				outcomes: "buy/a=better buy/b=better refund/a=guardrail_not_shown refund/b=guardrail_held",
				per:      "a=wait:guardrail_not_shown b=ship:primary_better,guardrails_held",
				decision: DecisionShip, names: []string{"b"}, reasonSet: []Reason{ReasonPrimaryBetter, ReasonGuardrailsHeld},
			},
		},
		{
			name:     "a sample ratio mismatch makes every row check_failed",
			mismatch: true,
			metrics: []MetricReadout{
				{Name: "buy", Comparisons: []Comparison{cmpRow("a", 0.02, true, true, 0), untested("b")}},
				{Name: "refund", Guardrail: guard, Comparisons: []Comparison{cmpRow("a", 0, false, false, 1), cmpRow("b", 0, false, false, 1)}},
			},
			want: want{
				outcomes: "buy/a=check_failed buy/b=check_failed refund/a=check_failed refund/b=check_failed",
				per:      "a=fix_data:sample_ratio_mismatch b=fix_data:sample_ratio_mismatch",
				decision: DecisionFixData, names: []string{"a", "b"}, reasonSet: []Reason{ReasonSampleRatioMismatch},
			},
		},
	}
	for _, tc := range cases {
		r := Readout{Control: "control", Arms: arms, Metrics: tc.metrics,
			SampleRatio: SampleRatio{Checked: true, Mismatch: tc.mismatch}}
		v := NewVerdict(r)
		var outcomes, per []string
		for _, row := range v.Rows {
			outcomes = append(outcomes, row.Metric+"/"+row.Treatment+"="+row.Outcome.String())
			m := r.Metrics[row.MetricIndex]
			if m.Name != row.Metric || m.Comparisons[row.ComparisonIndex].Treatment != row.Treatment ||
				row.RoleName() != m.RoleName() {
				t.Errorf("%s: row %+v does not point at its comparison", tc.name, row)
			}
		}
		for _, tv := range v.PerTreatment {
			var rs []string
			for _, r := range tv.Reasons {
				rs = append(rs, r.String())
			}
			per = append(per, tv.Treatment+"="+tv.Decision.String()+":"+strings.Join(rs, ","))
		}
		if got := strings.Join(outcomes, " "); got != tc.want.outcomes {
			t.Errorf("%s: outcomes\n got %s\nwant %s", tc.name, got, tc.want.outcomes)
		}
		if got := strings.Join(per, " "); got != tc.want.per {
			t.Errorf("%s: per treatment\n got %s\nwant %s", tc.name, got, tc.want.per)
		}
		if v.Decision != tc.want.decision || !reflect.DeepEqual(v.Treatments, tc.want.names) || !reflect.DeepEqual(v.Reasons, tc.want.reasonSet) {
			t.Errorf("%s: decision %v %v %v, want %v %v %v", tc.name, v.Decision, v.Treatments, v.Reasons,
				tc.want.decision, tc.want.names, tc.want.reasonSet)
		}
	}
}

// A readout with only a control arm has no rows and waits for data.
func TestVerdictNoTreatment(t *testing.T) {
	v := NewVerdict(Readout{Control: "control", Arms: []ArmUnits{{Name: "control"}},
		Metrics: []MetricReadout{{Name: "buy"}}})
	if v.Decision != DecisionWait || len(v.Rows) != 0 || len(v.Treatments) != 0 ||
		!reflect.DeepEqual(v.Reasons, []Reason{ReasonNotEnoughData}) {
		t.Errorf("verdict %+v", v)
	}
}

// Analyze fills the verdict from real tests. Counts: P2-01 (56/70 vs
// 48/80, two-sided p = 0.008045, R 4.2.2 prop.test(correct = FALSE)) and
// NI-01 (1180/10000 vs 1200/10000, margin 0.01, Farrington-Manning
// p = 0.04037), both from experiment/REFERENCE-VALUES.md; SRM-02 (50600
// vs 49400 units, p = 0.000148 < 0.001, R 4.2.2 chisq.test) for the
// failed check.
func TestAnalyzeVerdict(t *testing.T) {
	cases := []struct {
		name          string
		lowerIsBetter bool
		units         [2]int64 // control, treatment units of the check-only metric
		want          Decision
		outcomes      []Outcome
	}{
		{"P2-01 better, NI-01 held: ship", false, [2]int64{80, 70}, DecisionShip,
			[]Outcome{OutcomeBetter, OutcomeNoDetectableDifference, OutcomeGuardrailHeld}},
		{"P2-01 on a lower-is-better metric: stop", true, [2]int64{80, 70}, DecisionStop,
			[]Outcome{OutcomeWorse, OutcomeNoDetectableDifference, OutcomeGuardrailHeld}},
		{"SRM-02: fix data", false, [2]int64{49400, 50600}, DecisionFixData,
			[]Outcome{OutcomeCheckFailed, OutcomeCheckFailed, OutcomeCheckFailed}},
	}
	for _, tc := range cases {
		spec := spec2()
		spec.Metrics = []Metric{
			{Name: "guard", Events: []string{"guard"}, Guardrail: &Margin{Value: 0.01}},
			{Name: "buy", Events: []string{"buy"}, LowerIsBetter: tc.lowerIsBetter},
			{Name: "units", Events: []string{"units"}, Role: Secondary},
		}
		tl := twoArmTally([][2]int64{{1200, 10000}, {48, 80}, {0, tc.units[0]}}, [][2]int64{{1180, 10000}, {56, 70}, {0, tc.units[1]}})
		// The arm's units are those of the sample ratio check.
		tl.Arms[0].Units, tl.Arms[1].Units = tc.units[0], tc.units[1]
		r, err := Analyze(spec, tl, DefaultAnalysisOptions())
		if err != nil {
			t.Fatal(err)
		}
		var got []Outcome
		for _, row := range r.Verdict.Rows {
			got = append(got, row.Outcome)
		}
		if r.Verdict.Decision != tc.want || !reflect.DeepEqual(got, tc.outcomes) {
			t.Errorf("%s: %v %v, want %v %v", tc.name, r.Verdict.Decision, got, tc.want, tc.outcomes)
		}
		if r.Verdict.Rows[0].Metric != "buy" || r.Verdict.Rows[1].RoleName() != "secondary" || r.Verdict.Rows[2].RoleName() != "guardrail" {
			t.Errorf("%s: rows not in summary order: %+v", tc.name, r.Verdict.Rows)
		}
		if r.Metrics[2].Role != Secondary || r.Metrics[0].RoleName() != "guardrail" {
			t.Errorf("%s: roles %v %v", tc.name, r.Metrics[2].Role, r.Metrics[0].RoleName())
		}
	}
}

// A spec without a primary metric is refused: only primary metrics
// decide.
func TestSpecNeedsPrimary(t *testing.T) {
	for _, tc := range []struct {
		name    string
		metrics []Metric
		err     string
	}{
		{"secondary only", []Metric{{Name: "buy", Events: []string{"buy"}, Role: Secondary}}, "no primary metric"},
		{"guardrail only", []Metric{{Name: "refund", Events: []string{"refund"}, Guardrail: &Margin{Value: 0.01}}}, "no primary metric"},
		{"unknown role", []Metric{{Name: "buy", Events: []string{"buy"}, Role: 5}}, "unknown role"},
		{"primary and guardrail", []Metric{{Name: "buy", Events: []string{"buy"}},
			{Name: "refund", Events: []string{"refund"}, Guardrail: &Margin{Value: 0.01}}}, ""},
	} {
		spec := spec2()
		spec.Metrics = tc.metrics
		err := spec.validate()
		if (err == nil) != (tc.err == "") || (err != nil && !strings.Contains(err.Error(), tc.err)) {
			t.Errorf("%s: %v, want %q", tc.name, err, tc.err)
		}
	}
}

// Metric roles decide the family: the primary metric's comparisons are
// adjusted together, the secondary metric's in a family of their own,
// the guardrail's in none. Check values: R 4.2.2,
//
//	p <- c(prop.test(c(1090, 1000), c(10000, 10000), correct = FALSE)$p.value,
//	       prop.test(c(1040, 1000), c(10000, 10000), correct = FALSE)$p.value)
//	q <- c(prop.test(c(455, 400), c(10000, 10000), correct = FALSE)$p.value,
//	       prop.test(c(390, 400), c(10000, 10000), correct = FALSE)$p.value)
//	p.adjust(p, "holm"); p.adjust(q, "holm")
func TestAnalyzeFamiliesByRole(t *testing.T) {
	spec := spec2()
	spec.Arms = []string{"control", "t1", "t2"}
	spec.Metrics = []Metric{
		{Name: "a", Events: []string{"a"}},
		{Name: "b", Events: []string{"b"}, Role: Secondary},
		{Name: "g", Events: []string{"g"}, Guardrail: &Margin{Value: 0.01}},
	}
	tl := threeArmTally(
		[][2]int64{{1000, 10000}, {400, 10000}, {400, 10000}},
		[][2]int64{{1090, 10000}, {455, 10000}, {400, 10000}},
		[][2]int64{{1040, 10000}, {390, 10000}, {400, 10000}})
	r, err := Analyze(spec, tl, DefaultAnalysisOptions())
	if err != nil {
		t.Fatal(err)
	}
	want := map[string][]float64{
		"a": {0.074986739524022933, 0.350015600058214860},
		"b": {0.10908508371300855, 0.71658543757779569},
	}
	for _, m := range r.Metrics {
		for i, c := range m.Comparisons {
			if m.Guardrail != nil {
				if c.Adjusted != nil {
					t.Errorf("guardrail %s/%s adjusted", m.Name, c.Treatment)
				}
				continue
			}
			near(t, m.Name+"/"+c.Treatment+" adjusted p", c.Adjusted.PValue, want[m.Name][i], 1e-10)
			if c.Adjusted.FamilySize != 2 || c.Adjusted.Family != m.Role {
				t.Errorf("%s/%s: family %v of %d", m.Name, c.Treatment, c.Adjusted.Family, c.Adjusted.FamilySize)
			}
		}
	}
	if f := r.Families(); len(f) != 2 || f[0].Role != Primary || f[0].Size != 2 || f[1].Role != Secondary || f[1].Size != 2 ||
		f[0].Family == f[1].Family {
		t.Errorf("families %+v", f)
	}
	// Flag-only runs: every metric primary, one family of all of them.
	spec.Metrics[1].Role = Primary
	r, err = Analyze(spec, tl, DefaultAnalysisOptions())
	if err != nil {
		t.Fatal(err)
	}
	if f := r.Families(); len(f) != 1 || f[0].Size != 4 || r.SecondaryMultiplicity != nil {
		t.Errorf("all primary: families %+v", f)
	}
}

// ArmOrder: the control, the planned arms as given, then the others by
// name in byte order (upper case before lower case). Common practice.
func TestReadoutArmOrder(t *testing.T) {
	for _, tc := range []struct {
		control string
		planned []string
		in      []string
		want    []string
	}{
		{"control", nil, []string{"b", "control", "B", "a"}, []string{"control", "B", "a", "b"}},
		{"control", []string{"b", "control", "a"}, []string{"a", "control", "b"}, []string{"control", "b", "a"}},
		{"base", []string{"z"}, []string{"y", "z", "x", "base"}, []string{"base", "z", "x", "y"}},
	} {
		got := slices.Clone(tc.in)
		slices.SortStableFunc(got, ArmOrder(tc.control, tc.planned))
		if !slices.Equal(got, tc.want) {
			t.Errorf("ArmOrder(%q, %q) sorts %q to %q, want %q", tc.control, tc.planned, tc.in, got, tc.want)
		}
	}
	// Analyze puts a control missing from the data first, whatever the
	// tally's order.
	spec := spec2()
	spec.Arms = nil
	tl := twoArmTally([][2]int64{{5, 50}}, [][2]int64{{6, 50}})
	tl.Arms[0].Name, tl.Arms[1].Name = "zeta", "alpha"
	r, err := Analyze(spec, tl, DefaultAnalysisOptions())
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, a := range r.Arms {
		names = append(names, a.Name)
	}
	if want := []string{"control", "alpha", "zeta"}; !slices.Equal(names, want) {
		t.Errorf("arms %q, want %q", names, want)
	}
}

// A run reports its most urgent readout decision (issue 12: fix_data >
// stop > ship > wait). Common practice.
func TestMostUrgent(t *testing.T) {
	for _, tc := range []struct {
		in   []Decision
		want Decision
	}{
		{nil, DecisionWait},
		{[]Decision{DecisionWait, DecisionShip}, DecisionShip},
		{[]Decision{DecisionShip, DecisionStop, DecisionWait}, DecisionStop},
		{[]Decision{DecisionStop, DecisionFixData}, DecisionFixData},
	} {
		if got := MostUrgent(tc.in); got != tc.want {
			t.Errorf("MostUrgent(%v) = %v, want %v", tc.in, got, tc.want)
		}
	}
}
