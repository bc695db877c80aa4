package report

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/armtally/armtally/experiment/plan"
	"github.com/armtally/armtally/experiment/stats"
)

// This file writes a sample-size plan (experiment/plan) as text for a
// terminal and as JSON. The text follows the number style of the readout:
// counts with thousands separators; rates as percentages with two
// decimals; differences of rates in percentage points, signed, with two
// decimals and "pp"; relative changes as signed percentages with two
// decimals; alphas, and a power that was given, in their shortest form.

// planTest names the test every plan is for.
const planTest = "pooled two-proportion z test"

// planMethod names the method every plan uses.
const planMethod = "normal approximation with the pooled variance under H0 (Fleiss, Levin and Paik), equal allocation"

// planCaution is the note every plan ends with.
const planCaution = "The plan holds only if the experiment is read once, at the planned size: looking at the results repeatedly and stopping at the first significant look inflates false positives."

// planWidth is the width the notes of a text plan are wrapped at.
const planWidth = 76

// planDoc is the JSON layout of a plan; the fields are those of
// plan.Result under their JSON names, with the test, the method and the
// notes added.
type planDoc struct {
	SolveFor           string   `json:"solve_for"`
	Test               string   `json:"test"`
	Alternative        string   `json:"alternative"`
	BaselineRate       float64  `json:"baseline_rate"`
	TreatmentRate      float64  `json:"treatment_rate"`
	EffectAbsolute     float64  `json:"effect_absolute"`
	EffectRelative     float64  `json:"effect_relative"`
	Alpha              float64  `json:"alpha"`
	Adjustment         string   `json:"adjustment"`
	Comparisons        int      `json:"comparisons"`
	AlphaPerComparison float64  `json:"alpha_per_comparison"`
	Power              float64  `json:"power"`
	Arms               int      `json:"arms"`
	Metrics            int      `json:"metrics"`
	UnitsPerArm        int64    `json:"units_per_arm"`
	UnitsPerArmExact   *float64 `json:"units_per_arm_exact"`
	TotalUnits         int64    `json:"total_units"`
	DailyUnits         *float64 `json:"daily_units"`
	Days               *int64   `json:"days"`
	Method             string   `json:"method"`
	Notes              []string `json:"notes"`
}

// WritePlanJSON writes r to w as one indented JSON object followed by a
// newline: the plan's inputs and solution with every float at full
// precision, the test and method by name, and the notes WritePlan prints.
// A quantity that does not apply (the unrounded units when not solving for
// them, the days without daily units) is null.
func WritePlanJSON(w io.Writer, r plan.Result) error {
	d := planDoc{
		SolveFor:           r.Solve.String(),
		Test:               planTest,
		Alternative:        r.Alternative.String(),
		BaselineRate:       r.Baseline,
		TreatmentRate:      r.TreatmentRate,
		EffectAbsolute:     r.EffectAbsolute,
		EffectRelative:     r.EffectRelative,
		Alpha:              r.Alpha,
		Adjustment:         r.Adjust.String(),
		Comparisons:        r.Comparisons,
		AlphaPerComparison: r.AlphaPerComparison,
		Power:              r.Power,
		Arms:               r.Arms,
		Metrics:            r.Metrics,
		UnitsPerArm:        r.UnitsPerArm,
		TotalUnits:         r.TotalUnits,
		Method:             planMethod,
		Notes:              planNotes(r),
	}
	if r.Solve == plan.SolveUnits {
		d.UnitsPerArmExact = &r.UnitsPerArmExact
	}
	if r.DailyUnits > 0 {
		d.DailyUnits, d.Days = &r.DailyUnits, &r.Days
	}
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(d)
}

// WritePlan writes r for a terminal: the inputs, the solution, then the
// notes (method, sidedness, adjustment, the caution on repeated looks)
// wrapped at 76 columns.
func WritePlan(w io.Writer, r plan.Result) error {
	var b strings.Builder
	alt := map[stats.Alternative]string{
		stats.TwoSided: "two-sided",
		stats.Greater:  "one-sided, treatment higher (greater)",
		stats.Less:     "one-sided, treatment lower (less)",
	}[r.Alternative]
	fmt.Fprintf(&b, "Sample-size plan for the %s, %s\n\n", planTest, alt)
	row := func(label, value string) { fmt.Fprintf(&b, "  %-27s %s\n", label, value) }
	effect := fmt.Sprintf("%s absolute, %s relative (%s to %s)",
		planPoints(r.EffectAbsolute), planLift(r.EffectRelative), FormatPlanRate(r.Baseline), FormatPlanRate(r.TreatmentRate))
	row("baseline rate", FormatPlanRate(r.Baseline))
	if r.Solve != plan.SolveEffect {
		row("minimum detectable effect", effect)
	}
	if r.Comparisons == 1 {
		row("alpha", FormatPlanAlpha(r.Alpha))
	} else {
		row("alpha", fmt.Sprintf("%s for the family of %s comparisons, %s per comparison (%s)",
			FormatPlanAlpha(r.Alpha), FormatCount(int64(r.Comparisons)), FormatPlanAlpha(r.AlphaPerComparison), r.Adjust))
	}
	if r.Solve != plan.SolvePower {
		row("power", FormatPlanPower(r.Power))
	}
	b.WriteString("\n")
	switch r.Solve {
	case plan.SolveEffect:
		row("minimum detectable effect", effect)
	case plan.SolvePower:
		row("power", FormatPlanRate(r.Power))
	}
	row("units per arm", FormatCount(r.UnitsPerArm))
	row("arms", fmt.Sprintf("%s (the control and %s %s, equal sizes)", FormatCount(int64(r.Arms)), FormatCount(int64(r.Arms-1)),
		PluralWord(int64(r.Arms-1), "treatment", "treatments")))
	row("total units", FormatCount(r.TotalUnits))
	if r.DailyUnits > 0 {
		row("days", fmt.Sprintf("%s at %s units a day", FormatCount(r.Days), planAmount(r.DailyUnits)))
	}
	b.WriteString("\n")
	for i, n := range planNotes(r) {
		if i > 0 {
			b.WriteString("\n")
		}
		b.WriteString(wrapWords(n, planWidth))
	}
	_, err := io.WriteString(w, b.String())
	return err
}

// planNotes returns the notes of a plan: the method, the sidedness when it
// matters, the adjustment for several comparisons and the caution on
// repeated looks.
func planNotes(r plan.Result) []string {
	var notes []string
	if r.Solve == plan.SolveUnits {
		notes = append(notes, "Method: "+planMethod+"; the units per arm are rounded up.")
	} else {
		notes = append(notes, "Method: "+planMethod+".")
	}
	switch {
	case r.Alternative != stats.TwoSided:
		notes = append(notes, fmt.Sprintf("One-sided (%s): the plan assumes the effect goes the tested way; a change the other way is never significant.", r.Alternative))
	case r.Solve == plan.SolveEffect:
		notes = append(notes, "Two-sided: the detectable effect is shown as a rise. To check a drop of a given size, give it as a negative --mde with --units-per-arm.")
	}
	if n := adjustNote(r); n != "" {
		notes = append(notes, n)
	}
	return append(notes, planCaution)
}

// adjustNote says how the plan's per-comparison alpha follows from the
// family's alpha and the adjustment, or returns "" for one comparison.
func adjustNote(r plan.Result) string {
	m := r.Comparisons
	if m == 1 {
		return ""
	}
	family := fmt.Sprintf("%s comparisons (%s treatment %s x %s %s)", FormatCount(int64(m)),
		FormatCount(int64(r.Arms-1)), PluralWord(int64(r.Arms-1), "arm", "arms"),
		FormatCount(int64(r.Metrics)), PluralWord(int64(r.Metrics), "metric", "metrics"))
	a := FormatPlanAlpha(r.AlphaPerComparison)
	switch r.Adjust {
	case stats.None:
		return fmt.Sprintf("No adjustment for %s: each is tested at alpha %s, so the chance of at least one false positive in the family is above %s (%s if the comparisons were independent).",
			family, FormatPlanAlpha(r.Alpha), FormatPlanAlpha(r.Alpha), FormatPlanAlpha(r.FamilyErrorIndependent))
	case stats.Bonferroni:
		return fmt.Sprintf("Bonferroni over %s: each is tested at alpha / %d = %s.", family, m, a)
	case stats.Holm, stats.Hochberg:
		name := "Holm's"
		if r.Adjust == stats.Hochberg {
			name = "Hochberg's"
		}
		return fmt.Sprintf("%s method over %s, planned at the Bonferroni level alpha / %d = %s: %s method rejects every comparison Bonferroni rejects, so it never needs more units; the plan is conservative and the analysis may reject more.",
			name, family, m, a, name)
	case stats.BenjaminiHochberg:
		return fmt.Sprintf("Benjamini-Hochberg over %s, planned at alpha / %d = %s as a conservative bound: it controls the false discovery rate, not the chance of any false positive, and rejects every comparison with a p-value at most alpha / %d (often more), so fewer units may do when several comparisons have real effects.",
			family, m, a, m)
	case stats.BenjaminiYekutieli:
		c := planNum(r.Harmonic)
		terms := fmt.Sprintf("1 + 1/2 + ... + 1/%d", m)
		if m <= 4 {
			terms = "1"
			for k := 2; k <= m; k++ {
				terms += fmt.Sprintf(" + 1/%d", k)
			}
		}
		return fmt.Sprintf("Benjamini-Yekutieli over %s, planned at alpha / (%d x %s) = %s, where %s = %s: the smallest p-value threshold it applies, so it rejects every comparison at or below it and the plan is conservative; alpha / %d would not be enough.",
			family, m, c, a, c, terms, m)
	}
	return ""
}

// planNum prints v with at most 4 significant digits and no exponent:
// 1.833, 2.45. Only the factor c(m) of Benjamini-Yekutieli is printed so.
func planNum(v float64) string {
	r, _ := strconv.ParseFloat(strconv.FormatFloat(v, 'g', 4, 64), 64)
	return strconv.FormatFloat(r, 'f', -1, 64)
}

// planDecimals returns the decimals that show the percentage v: two, or,
// for a nonzero v that two decimals would show as zero, enough for two
// significant digits (a baseline of 0.0004% is "0.00040%", not "0.00%").
func planDecimals(v float64) int {
	a := math.Abs(v)
	if a == 0 || a >= 0.005 {
		return 2
	}
	return min(1-int(math.Floor(math.Log10(a))), 20)
}

// FormatPlanRate prints a rate as a plan does: a percentage with two
// decimals, 0.1 is "10.00%" and 0.11220102507438608 is "11.22%".
func FormatPlanRate(v float64) string { return planHundredths(v, fixed, "%") }

// planPoints prints a difference of rates in percentage points, signed,
// with two decimals: 0.0122 is "+1.22 pp".
func planPoints(d float64) string { return planHundredths(d, signed, " pp") }

// planLift prints a relative change as a signed percentage with two
// decimals: 0.122 is "+12.20%".
func planLift(v float64) string { return planHundredths(v, signed, "%") }

// planHundredths prints 100 v with the decimals of planDecimals, by
// format (fixed or signed), and the unit.
func planHundredths(v float64, format func(float64, int) string, unit string) string {
	p := v * 100
	return format(p, planDecimals(p)) + unit
}

// FormatPlanAlpha prints an alpha in its shortest form: the shortest
// decimal that reads back as the same float64, 0.05 is "0.05" and 0.0125
// is "0.0125". A plan's derived alphas are rounded to
// plan.DerivedDigits significant digits, so 0.05 / 3 is "0.0166666666667",
// the same number the JSON holds.
func FormatPlanAlpha(a float64) string { return strconv.FormatFloat(a, 'f', -1, 64) }

// FormatPlanPower prints a target power in its shortest form as a
// percentage: 0.8 is "80%" and 0.855 is "85.5%". A power a plan computes
// is a rate, printed by FormatPlanRate.
func FormatPlanPower(p float64) string {
	v, _ := strconv.ParseFloat(strconv.FormatFloat(p*100, 'g', 15, 64), 64)
	return strconv.FormatFloat(v, 'f', -1, 64) + "%"
}

// planAmount prints an amount of units with thousands separators, and
// the decimals of one that is not whole in their shortest form: 20000 is
// "20,000", 1234.5 is "1,234.5".
func planAmount(v float64) string {
	if v != math.Trunc(v) || math.Abs(v) >= 1e18 {
		s := strconv.FormatFloat(v, 'f', -1, 64)
		whole, frac, _ := strings.Cut(s, ".")
		if n, err := strconv.ParseInt(whole, 10, 64); err == nil {
			if frac != "" {
				return FormatCount(n) + "." + frac
			}
			return FormatCount(n)
		}
		return s
	}
	return FormatCount(int64(v))
}

// wrapWords breaks s into lines of at most width bytes at spaces (a longer
// word gets a line of its own) and ends it with a newline.
func wrapWords(s string, width int) string {
	var b strings.Builder
	n := 0
	for _, word := range strings.Fields(s) {
		switch {
		case n == 0:
		case n+1+len(word) > width:
			b.WriteByte('\n')
			n = 0
		default:
			b.WriteByte(' ')
			n++
		}
		b.WriteString(word)
		n += len(word)
	}
	b.WriteByte('\n')
	return b.String()
}
