package report

import (
	"bytes"
	"encoding/json"
	"strings"
	"testing"

	"github.com/armtally/armtally/experiment/plan"
	"github.com/armtally/armtally/experiment/stats"
)

// The plans below are solved by experiment/plan; the numbers looked for in
// the output are the check values of REFERENCE-VALUES.md, section 11 (R
// 4.2.2 stats::power.prop.test), named by case id, or hand arithmetic
// worked out beside them.

// solvedPlan solves in, with the defaults of the command filled in where
// in leaves them zero (alpha 0.05, power 0.8, 2 arms, 1 metric).
func solvedPlan(t *testing.T, in plan.Input, mde string) plan.Result {
	t.Helper()
	if mde != "" {
		m, err := plan.ParseMDE(mde)
		if err != nil {
			t.Fatal(err)
		}
		in.Effect = m
	}
	if in.Alpha == 0 {
		in.Alpha = 0.05
	}
	if in.Power == 0 && in.Solve != plan.SolvePower {
		in.Power = 0.8
	}
	if in.Arms == 0 {
		in.Arms = 2
	}
	if in.Metrics == 0 {
		in.Metrics = 1
	}
	r, err := plan.Compute(in)
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// TestWritePlan checks that the text plan shows the numbers, the method,
// the note on the adjustment and the caution on repeated looks.
func TestWritePlan(t *testing.T) {
	cases := []struct {
		name string
		in   plan.Input
		mde  string
		want []string
		not  []string
	}{
		// SS-01: 3841 per arm, 2 x 3841 = 7682 in all, 7682 / 500 = 15.4,
		// so 16 days.
		{"SS-01", plan.Input{Solve: plan.SolveUnits, Baseline: 0.1, DailyUnits: 500}, "2pp",
			[]string{"3,841", "7,682", "16 at 500 units a day", "+2.00 pp absolute, +20.00% relative (10.00% to 12.00%)",
				"pooled variance under H0 (Fleiss,", "rounded up", "read once, at the planned size", "inflates false positives"},
			[]string{"comparisons", "One-sided"}},
		// 0.05 / 2 = 0.025.
		{"holm", plan.Input{Solve: plan.SolveUnits, Baseline: 0.1, Arms: 3, Adjust: stats.Holm}, "2pp",
			[]string{"2 comparisons (2 treatment arms x 1 metric)", "0.025 per comparison (holm)", "Holm's method", "Bonferroni level", "conservative"}, nil},
		{"hochberg", plan.Input{Solve: plan.SolveUnits, Baseline: 0.1, Arms: 3, Adjust: stats.Hochberg}, "2pp",
			[]string{"Hochberg's method", "0.025 per comparison (hochberg)"}, []string{"Holm"}},
		// 0.05 / 3 = 0.0166666666667 to 12 significant digits.
		{"bonferroni", plan.Input{Solve: plan.SolveUnits, Baseline: 0.1, Metrics: 3, Adjust: stats.Bonferroni}, "2pp",
			[]string{"Bonferroni over 3 comparisons (1 treatment arm x 3 metrics): each is tested at alpha / 3 = 0.0166666666667."}, nil},
		// One comparison: no note on the adjustment.
		{"bh one comparison", plan.Input{Solve: plan.SolveUnits, Baseline: 0.1, Adjust: stats.BenjaminiHochberg}, "2pp",
			[]string{"alpha 0.05 power 80%"}, []string{"false discovery rate", "comparisons"}},
		{"bh 3 metrics", plan.Input{Solve: plan.SolveUnits, Baseline: 0.1, Metrics: 3, Adjust: stats.BenjaminiHochberg}, "2pp",
			[]string{"conservative bound", "false discovery rate"}, nil},
		// c(3) = 1 + 1/2 + 1/3 = 11/6 = 1.833; 0.05 / (3 x 11/6) = 0.05 /
		// 5.5 = 0.00909090909091 to 12 significant digits.
		{"by", plan.Input{Solve: plan.SolveUnits, Baseline: 0.1, Arms: 4, Adjust: stats.BenjaminiYekutieli}, "2pp",
			[]string{"1.833 = 1 + 1/2 + 1/3", "0.00909090909091 per comparison (by)"}, nil},
		// c(6) = 2.45; 0.05 / (6 x 2.45) = 0.05 / 14.7 = 0.00340136054422.
		{"by 6", plan.Input{Solve: plan.SolveUnits, Baseline: 0.1, Arms: 7, Adjust: stats.BenjaminiYekutieli}, "2pp",
			[]string{"2.45 = 1 + 1/2 + ... + 1/6", "0.00340136054422 per comparison"}, nil},
		// 1 - 0.95^3 = 0.142625.
		{"none", plan.Input{Solve: plan.SolveUnits, Baseline: 0.1, Arms: 4, Adjust: stats.None}, "2pp",
			[]string{"No adjustment", "0.142625 if the comparisons were independent"}, nil},
		// SS-08: power 0.37109 at 5000 per arm.
		{"SS-08 power", plan.Input{Solve: plan.SolvePower, Baseline: 0.1, UnitsPerArm: 5000}, "1pp",
			[]string{"37.11%", "5,000", "10,000"}, []string{"rounded up"}},
		// SS-09: detectable p2 = 0.112201 at 10000 per arm.
		{"SS-09 effect", plan.Input{Solve: plan.SolveEffect, Baseline: 0.1, UnitsPerArm: 10000}, "",
			[]string{"+1.22 pp absolute, +12.20% relative (10.00% to 11.22%)", "shown as a rise"}, nil},
		// SS-05: 11620 per arm, one-sided.
		{"SS-05 greater", plan.Input{Solve: plan.SolveUnits, Baseline: 0.1, Alternative: stats.Greater}, "1pp",
			[]string{"one-sided, treatment higher (greater)", "11,620", "One-sided (greater)"}, []string{"shown as a rise"}},
		// 2 x 10000 = 20000 units; 20000 / 1234.5 = 16.2, so 17 days.
		{"fractional daily units", plan.Input{Solve: plan.SolveEffect, Baseline: 0.1, UnitsPerArm: 10000, DailyUnits: 1234.5}, "",
			[]string{"17 at 1,234.5 units a day"}, nil},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			var b bytes.Buffer
			if err := WritePlan(&b, solvedPlan(t, tc.in, tc.mde)); err != nil {
				t.Fatal(err)
			}
			out := b.String()
			flat := strings.Join(strings.Fields(out), " ")
			for _, w := range tc.want {
				if !strings.Contains(flat, w) {
					t.Errorf("output lacks %q:\n%s", w, out)
				}
			}
			for _, w := range tc.not {
				if strings.Contains(flat, w) {
					t.Errorf("output has %q:\n%s", w, out)
				}
			}
			if !strings.HasPrefix(out, "Sample-size plan for the pooled two-proportion z test, ") || !strings.HasSuffix(out, "inflates false positives.\n") {
				t.Errorf("output does not start with the title and end with the caution:\n%s", out)
			}
			_, notes, _ := strings.Cut(out, "\n\nMethod: ")
			for _, line := range strings.Split(notes, "\n") {
				if len(line) > planWidth {
					t.Errorf("note line of %d bytes, over %d: %q", len(line), planWidth, line)
				}
			}
		})
	}
}

// TestWritePlanJSON checks the JSON layout: the keys, the null quantities
// and the values of SS-01 (3841 per arm, exact 3840.8474824362756) and
// SS-09 (10000 per arm).
func TestWritePlanJSON(t *testing.T) {
	decode := func(r plan.Result) map[string]any {
		t.Helper()
		var b bytes.Buffer
		if err := WritePlanJSON(&b, r); err != nil {
			t.Fatal(err)
		}
		if !strings.HasSuffix(b.String(), "}\n") || !strings.HasPrefix(b.String(), "{\n  \"solve_for\": ") {
			t.Errorf("not an indented object with a final newline:\n%s", b.String())
		}
		var m map[string]any
		if err := json.Unmarshal(b.Bytes(), &m); err != nil {
			t.Fatal(err)
		}
		return m
	}
	keys := []string{"solve_for", "test", "alternative", "baseline_rate", "treatment_rate", "effect_absolute", "effect_relative",
		"alpha", "adjustment", "comparisons", "alpha_per_comparison", "power", "arms", "metrics", "units_per_arm",
		"units_per_arm_exact", "total_units", "daily_units", "days", "method", "notes"}

	m := decode(solvedPlan(t, plan.Input{Solve: plan.SolveUnits, Baseline: 0.1, Adjust: stats.Holm, DailyUnits: 500}, "2pp"))
	if len(m) != len(keys) {
		t.Errorf("%d keys, want %d", len(m), len(keys))
	}
	for _, k := range keys {
		if _, ok := m[k]; !ok {
			t.Errorf("no key %q", k)
		}
	}
	// 2 x 3841 = 7682; 7682 / 500 = 15.4, so 16 days.
	want := map[string]any{"solve_for": "units_per_arm", "alternative": "two-sided", "adjustment": "holm",
		"units_per_arm": 3841.0, "total_units": 7682.0, "daily_units": 500.0, "days": 16.0, "comparisons": 1.0}
	for k, v := range want {
		if m[k] != v {
			t.Errorf("%s = %v, want %v", k, m[k], v)
		}
	}
	if x, _ := m["units_per_arm_exact"].(float64); x < 3840.84748243 || x > 3840.84748244 {
		t.Errorf("units_per_arm_exact %v, want 3840.8474824362756 (SS-01)", m["units_per_arm_exact"])
	}
	if notes, _ := m["notes"].([]any); len(notes) != 2 || notes[1] != planCaution {
		t.Errorf("notes %v, want the method and the caution", m["notes"])
	}

	m = decode(solvedPlan(t, plan.Input{Solve: plan.SolveEffect, Baseline: 0.1, UnitsPerArm: 10000}, ""))
	for _, k := range []string{"units_per_arm_exact", "daily_units", "days"} {
		if v, ok := m[k]; !ok || v != nil {
			t.Errorf("%s = %v, want null", k, v)
		}
	}
	if m["solve_for"] != "detectable_effect" || m["units_per_arm"] != 10000.0 {
		t.Errorf("solve_for %v, units_per_arm %v; want detectable_effect, 10000", m["solve_for"], m["units_per_arm"])
	}
}

// TestPlanFormats checks the number formats of a plan against hand-written
// expectations (common practice, the number style of the README: rates
// with two decimals, points and lifts signed with two decimals, alphas and
// a given power in their shortest form, counts with separators).
func TestPlanFormats(t *testing.T) {
	cases := []struct{ got, want string }{
		{planNum(1.8333333333333333), "1.833"},
		{planNum(2.45), "2.45"},
		{FormatPlanRate(0.1), "10.00%"},
		{FormatPlanRate(0.11220102507438608), "11.22%"},
		{FormatPlanRate(0.044), "4.40%"},
		{FormatPlanRate(0.3710889343229116), "37.11%"},
		// Two decimals would show 0.00%: two significant digits instead.
		{FormatPlanRate(0.0000042), "0.00042%"},
		{FormatPlanRate(-0.01), "-1.00%"},
		{planPoints(0.02), "+2.00 pp"},
		{planPoints(0.0040000000000000036), "+0.40 pp"},
		{planPoints(-0.005), "-0.50 pp"},
		{planLift(0.2), "+20.00%"},
		{planLift(-0.15), "-15.00%"},
		{FormatPlanAlpha(0.05), "0.05"},
		{FormatPlanAlpha(0.0125), "0.0125"},
		{FormatPlanAlpha(1e-8), "0.00000001"},
		{FormatPlanPower(0.8), "80%"},
		{FormatPlanPower(0.855), "85.5%"},
		{FormatPlanPower(0.9), "90%"},
		{planAmount(20000), "20,000"},
		{planAmount(1234.5), "1,234.5"},
		{planAmount(1e300), "1" + strings.Repeat("0", 300)},
	}
	for i, tc := range cases {
		if tc.got != tc.want {
			t.Errorf("case %d: %q, want %q", i, tc.got, tc.want)
		}
	}
}

func TestWrapWords(t *testing.T) {
	cases := []struct {
		s     string
		width int
		want  string
	}{
		{"a bb ccc dddd", 6, "a bb\nccc\ndddd\n"},
		{"a bb ccc", 8, "a bb ccc\n"},
		{"averyverylongword b", 5, "averyverylongword\nb\n"},
		{"  spaced   out  ", 80, "spaced out\n"},
		{"", 10, "\n"},
	}
	for _, tc := range cases {
		if got := wrapWords(tc.s, tc.width); got != tc.want {
			t.Errorf("wrapWords(%q, %d) = %q, want %q", tc.s, tc.width, got, tc.want)
		}
	}
}

// floatNoise reports whether a JSON number as written carries the error of
// float64 arithmetic on short decimals: 15 or more significant digits
// with a run of five zeros or nines inside them, as in
// 0.044000000000000004 or 0.0040000000000000036 (common practice: such
// runs mark a decimal that was meant to be short).
func floatNoise(num string) bool {
	mant, _, _ := strings.Cut(strings.ToLower(num), "e")
	digits := strings.TrimLeft(strings.NewReplacer("-", "", ".", "").Replace(mant), "0")
	digits = strings.TrimRight(digits, "0")
	return len(digits) >= 15 && (strings.Contains(digits, "00000") || strings.Contains(digits, "99999"))
}

// TestPlanJSONNoFloatNoise checks that no number of a plan's JSON carries
// float noise, over plans whose derived values have it when computed
// without rounding (the float64 values in the comments are those Go gives
// at run time), and that those values are the decimals of the hand
// arithmetic beside them.
func TestPlanJSONNoFloatNoise(t *testing.T) {
	for _, num := range []string{"0.044000000000000004", "0.0040000000000000036", "0.10000000000000009", "2.4499999999999997"} {
		if !floatNoise(num) {
			t.Errorf("floatNoise(%q) = false: the check cannot fail", num)
		}
	}
	for _, num := range []string{"0.044", "3840.8474824362756", "0.11220102507438608", "0.0166666666667", "1e-20"} {
		if floatNoise(num) {
			t.Errorf("floatNoise(%q) = true for a clean number", num)
		}
	}
	cases := []struct {
		name string
		in   plan.Input
		mde  string
		want map[string]string // JSON numbers by key, as written
	}{
		// 4% + 10% of it = 4.4% (0.04 x 1.1 = 0.044000000000000004);
		// 4.4% - 4% = 0.4 pp (0.0040000000000000036); 4.4 / 4 - 1 = 0.1
		// (0.10000000000000009); 0.05 / 4 = 0.0125.
		{"relative effect", plan.Input{Solve: plan.SolveUnits, Baseline: 0.04, Arms: 3, Metrics: 2, Adjust: stats.Holm, DailyUnits: 20000}, "10%",
			map[string]string{"baseline_rate": "0.04", "treatment_rate": "0.044", "effect_absolute": "0.004", "effect_relative": "0.1",
				"alpha_per_comparison": "0.0125"}},
		// 7% + 0.1 pp = 7.1%; 7.1 / 7 - 1 = 0.0142857142857 (12
		// significant digits); 0.07 / 7 = 0.01 (0.010000000000000002).
		{"absolute effect", plan.Input{Solve: plan.SolvePower, Baseline: 0.07, UnitsPerArm: 100000, Alpha: 0.07, Arms: 8, Adjust: stats.Bonferroni}, "0.1pp",
			map[string]string{"treatment_rate": "0.071", "effect_absolute": "0.001", "effect_relative": "0.0142857142857", "alpha_per_comparison": "0.01"}},
		// A drop: 30% - 15% of it = 25.5%; 25.5 - 30 = -4.5 pp.
		{"drop", plan.Input{Solve: plan.SolveUnits, Baseline: 0.3, Alternative: stats.Less}, "15%",
			map[string]string{"treatment_rate": "0.255", "effect_absolute": "-0.045", "effect_relative": "-0.15"}},
		{"detectable effect", plan.Input{Solve: plan.SolveEffect, Baseline: 0.1, UnitsPerArm: 10000, Arms: 7, Adjust: stats.BenjaminiYekutieli, DailyUnits: 1234.5}, "",
			map[string]string{"daily_units": "1234.5"}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			var b bytes.Buffer
			if err := WritePlanJSON(&b, solvedPlan(t, tc.in, tc.mde)); err != nil {
				t.Fatal(err)
			}
			dec := json.NewDecoder(&b)
			dec.UseNumber()
			var doc map[string]any
			if err := dec.Decode(&doc); err != nil {
				t.Fatal(err)
			}
			for k, v := range doc {
				if n, ok := v.(json.Number); ok && floatNoise(n.String()) {
					t.Errorf("%s = %s carries float noise", k, n)
				}
			}
			for k, want := range tc.want {
				if n, _ := doc[k].(json.Number); n.String() != want {
					t.Errorf("%s = %v, want %s", k, doc[k], want)
				}
			}
		})
	}
}
