package main

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/spf13/pflag"

	"github.com/armtally/armtally/experiment/stats"
	"github.com/armtally/armtally/report"
)

const planUsage = `Usage: armtally plan --baseline RATE --mde EFFECT [flags]
       armtally plan --baseline RATE --units-per-arm N [flags]
       armtally plan --baseline RATE --mde EFFECT --units-per-arm N [flags]

Sizes a conversion experiment before it starts, for the pooled
two-proportion z test that 'armtally analyze' runs. Every arm gets the
same number of units.

  --mde alone             the units each arm needs to detect the effect
                          with the chosen power
  --units-per-arm alone   the smallest effect that size detects with the
                          chosen power
  both                    the power that size has for that effect

The baseline (--baseline) is the control arm's conversion rate, 0.10 or
10%. The minimum detectable effect (--mde) is the smallest change in the
treatment's rate worth finding:
  2pp         an absolute change of 2 percentage points (10% to 12%)
  15%         a change relative to the baseline (10% to 11.5%)
  -2pp, -15%  a drop. Without a sign the change goes the tested way: up
              for two-sided and greater, down for less.

With several treatment arms or metrics, the (arms - 1) x metrics
comparisons with the control form one family, and each comparison is
planned at a per-comparison alpha (--adjust):
  none                          alpha itself; false positives in the
                                family add up
  bonferroni, holm, hochberg    alpha / comparisons: every comparison with
                                a p-value at most that is rejected by all
                                three, so the plan is conservative for Holm
                                and Hochberg
  bh                            alpha / comparisons, a conservative bound
                                for the false discovery rate
  by                            alpha / (comparisons x (1 + 1/2 + ... +
                                1/comparisons)), the smallest threshold
                                Benjamini-Yekutieli can apply

The method is the normal approximation with the pooled variance under H0
(Fleiss, Levin and Paik). The plan holds only if the experiment is read
once, at the planned size: looking repeatedly and stopping at the first
significant look inflates false positives.

Examples:
  armtally plan --baseline 10% --mde 2pp
  armtally plan --baseline 0.04 --mde 10% --arms 3 --metrics 2 --daily-units 20000
  armtally plan --baseline 10% --units-per-arm 10000 --daily-units 3000
  armtally plan --baseline 10% --mde 1pp --units-per-arm 5000 --alternative greater --json plan.json

Flags:
`

// planFlags holds the values of the plan flags.
type planFlags struct {
	baseline, mde, power string
	unitsPerArm          int64
	alpha                float64
	alternative, adjust  string
	arms, metrics        int
	dailyUnits           float64
	jsonOut              string
}

// Ways a plan is solved.
const (
	solveUnits  = "units_per_arm"
	solveEffect = "detectable_effect"
	solvePower  = "power"
)

// planInput is a checked plan request.
type planInput struct {
	solveFor    string
	baseline    float64
	effect      mde     // when solving for units or power
	unitsPerArm int64   // when solving for the effect or power
	alpha       float64 // the family's alpha
	power       float64 // the target power, when solving for units or the effect
	alt         stats.Alternative
	adjust      stats.AdjustMethod
	arms        int
	metrics     int
	dailyUnits  float64 // 0: not given
}

// mde is a parsed --mde: a change of the treatment's rate from the baseline,
// either in absolute terms (a difference of rates) or relative to the
// baseline.
type mde struct {
	text     string
	value    float64 // 0.02 for 2pp, 0.15 for 15%
	relative bool
	signed   bool // the value was written with + or -
}

// parseMDE parses --mde: an optional sign, a positive number and the unit
// pp (percentage points, absolute) or % (relative to the baseline).
func parseMDE(s string) (mde, error) {
	m := mde{text: s}
	t := strings.TrimSpace(s)
	neg := false
	if t != "" && (t[0] == '+' || t[0] == '-') {
		neg, m.signed = t[0] == '-', true
		t = t[1:]
	}
	switch {
	case strings.HasSuffix(t, "pp"):
		t = strings.TrimSuffix(t, "pp")
	case strings.HasSuffix(t, "%"):
		t, m.relative = strings.TrimSuffix(t, "%"), true
	default:
		return m, usagef("plan: --mde %q: give a unit, pp for percentage points (absolute) or %% for a change relative to the baseline, as in 2pp or 15%%", s)
	}
	t = strings.TrimSpace(t)
	v, err := strconv.ParseFloat(t, 64)
	if err != nil || strings.HasPrefix(t, "+") || strings.HasPrefix(t, "-") || math.IsInf(v, 0) || math.IsNaN(v) {
		return m, usagef("plan: --mde %q: %q is not a number", s, t)
	}
	if v == 0 {
		return m, usagef("plan: --mde %q: a zero effect cannot be detected", s)
	}
	m.value = v / 100
	if neg {
		m.value = -m.value
	}
	return m, nil
}

// treatmentRate returns the treatment rate the effect aims at: baseline
// plus the effect, which goes down under [stats.Less] when unsigned.
func (m mde) treatmentRate(baseline float64, alt stats.Alternative) (float64, error) {
	v := m.value
	if !m.signed && alt == stats.Less {
		v = -v
	}
	if m.signed {
		switch {
		case alt == stats.Greater && v < 0:
			return 0, usagef("plan: --mde %q is a drop, but --alternative greater tests for a rise", m.text)
		case alt == stats.Less && v > 0:
			return 0, usagef("plan: --mde %q is a rise, but --alternative less tests for a drop", m.text)
		}
	}
	p2 := baseline + v
	if m.relative {
		p2 = baseline * (1 + v)
	}
	if !(p2 > 0 && p2 < 1) {
		return 0, usagef("plan: --mde %q: the treatment rate would be %s, want a rate strictly between 0%% and 100%% (baseline %s)",
			m.text, planPct(p2), planPct(baseline))
	}
	return p2, nil
}

func newPlanFlagSet(f *planFlags, stderr io.Writer) *pflag.FlagSet {
	fs := pflag.NewFlagSet("plan", pflag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.SortFlags = false
	fs.StringVar(&f.baseline, "baseline", "", "the control arm's conversion rate, 0.10 or 10% (required)")
	fs.StringVar(&f.mde, "mde", "", "minimum detectable effect: 2pp (absolute, percentage points) or 15% (relative to --baseline), optionally signed")
	fs.Int64Var(&f.unitsPerArm, "units-per-arm", 0, "units in each arm: solve for the detectable effect, or with --mde for the power")
	fs.Float64Var(&f.alpha, "alpha", 0.05, "significance level of the family of comparisons")
	fs.StringVar(&f.power, "power", "0.8", "chance of detecting the effect when it is real, 0.8 or 80%")
	fs.StringVar(&f.alternative, "alternative", "two-sided", "alternative hypothesis: two-sided, greater (treatment higher) or less")
	fs.IntVar(&f.arms, "arms", 2, "number of arms, the control included")
	fs.IntVar(&f.metrics, "metrics", 1, "number of metrics each treatment is compared on")
	fs.StringVar(&f.adjust, "adjust", "holm", "multiple-comparison adjustment the analysis will use: none, bonferroni, holm, hochberg, bh or by")
	fs.Float64Var(&f.dailyUnits, "daily-units", 0, "units entering the experiment per day, all arms together: also print the days needed")
	fs.StringVar(&f.jsonOut, "json", "", "also write the plan as JSON to this file")
	return fs
}

// maxArms and maxMetrics bound --arms and --metrics far beyond any real
// experiment, so that every count below fits easily.
const (
	maxArms    = 1000
	maxMetrics = 1000
)

// parsePlan parses and checks the plan command line.
func parsePlan(args []string, stdout, stderr io.Writer) (planInput, planFlags, error) {
	var f planFlags
	var in planInput
	fs := newPlanFlagSet(&f, stderr)
	if err := parseFlags(fs, args, planUsage, stdout); err != nil {
		return in, f, err
	}
	if fs.NArg() > 0 {
		return in, f, usagef("plan: unexpected arguments %s (plan takes flags only)", strings.Join(fs.Args(), " "))
	}
	if !fs.Changed("baseline") {
		return in, f, usagef("plan: give the control arm's conversion rate with --baseline, as in --baseline 10%%")
	}
	var err error
	if in.baseline, err = parseRate(f.baseline); err != nil {
		return in, f, usagef("plan: --baseline: %v", err)
	}
	hasMDE, hasUnits := fs.Changed("mde"), fs.Changed("units-per-arm")
	switch {
	case hasMDE && hasUnits:
		in.solveFor = solvePower
		if fs.Changed("power") {
			return in, f, usagef("plan: --power has no use with both --mde and --units-per-arm: the plan then solves for the power")
		}
	case hasMDE:
		in.solveFor = solveUnits
	case hasUnits:
		in.solveFor = solveEffect
	default:
		return in, f, usagef("plan: give --mde (to solve for the units per arm) or --units-per-arm (to solve for the detectable effect), or both (for the power)")
	}
	if in.alt, err = stats.ParseAlternative(f.alternative); err != nil {
		return in, f, usagef("plan: --alternative %q: want two-sided, greater or less", f.alternative)
	}
	if hasMDE {
		if in.effect, err = parseMDE(f.mde); err != nil {
			return in, f, err
		}
		if _, err := in.effect.treatmentRate(in.baseline, in.alt); err != nil {
			return in, f, err
		}
	}
	if hasUnits {
		if f.unitsPerArm < 1 {
			return in, f, usagef("plan: --units-per-arm %d: want at least 1", f.unitsPerArm)
		}
		in.unitsPerArm = f.unitsPerArm
	}
	if !(f.alpha > 0 && f.alpha < 1) {
		return in, f, usagef("plan: --alpha %v is not strictly between 0 and 1", f.alpha)
	}
	in.alpha = f.alpha
	if in.solveFor != solvePower {
		if in.power, err = parseRate(f.power); err != nil {
			return in, f, usagef("plan: --power: %v", err)
		}
	}
	if f.arms < 2 || f.arms > maxArms {
		return in, f, usagef("plan: --arms %d: want the control and at least one treatment, 2 to %d arms", f.arms, maxArms)
	}
	in.arms = f.arms
	if f.metrics < 1 || f.metrics > maxMetrics {
		return in, f, usagef("plan: --metrics %d: want 1 to %d", f.metrics, maxMetrics)
	}
	in.metrics = f.metrics
	if in.adjust, err = stats.ParseAdjustMethod(f.adjust); err != nil {
		return in, f, usagef("plan: --adjust %q: want none, bonferroni, holm, hochberg, bh or by", f.adjust)
	}
	if fs.Changed("daily-units") {
		if !(f.dailyUnits > 0) || math.IsInf(f.dailyUnits, 0) {
			return in, f, usagef("plan: --daily-units %v: want a positive number", f.dailyUnits)
		}
		in.dailyUnits = f.dailyUnits
	}
	// A power at or below the per-comparison alpha/sides needs no units at
	// all; say so against the flag rather than as a failed computation.
	if in.solveFor != solvePower {
		a, _ := comparisonAlpha(in)
		if s := planSides(in.alt); !(in.power > a/s) {
			return in, f, usagef("plan: --power %v: want more than the per-comparison alpha / %v = %.4g", in.power, s, a/s)
		}
	}
	return in, f, nil
}

func planSides(alt stats.Alternative) float64 {
	if alt == stats.TwoSided {
		return 2
	}
	return 1
}

// comparisonAlpha returns the per-comparison alpha the plan uses for the
// family of (arms - 1) x metrics comparisons and a sentence that says why.
//
// Bonferroni rejects a comparison when p <= alpha/m. Holm and Hochberg
// reject every comparison with p <= alpha/m too (their thresholds run from
// alpha/m up), and so does Benjamini-Hochberg (thresholds k alpha/m), so
// planning at alpha/m gives each comparison at least the planned power under
// all four. Benjamini-Yekutieli's thresholds are k alpha/(m c(m)) with
// c(m) = 1 + 1/2 + ... + 1/m: its smallest one, alpha/(m c(m)), is the
// bound that gives the same guarantee.
func comparisonAlpha(in planInput) (float64, string) {
	m := (in.arms - 1) * in.metrics
	mf := float64(m)
	family := fmt.Sprintf("%d comparisons (%d treatment %s x %d %s)",
		m, in.arms-1, planPlural(in.arms-1, "arm", "arms"), in.metrics, planPlural(in.metrics, "metric", "metrics"))
	if m == 1 {
		return in.alpha, ""
	}
	a := in.alpha / mf
	switch in.adjust {
	case stats.None:
		return in.alpha, fmt.Sprintf("No adjustment for %s: each is tested at alpha %s, so the chance of at least one false positive in the family is above %s (%s if the comparisons were independent).",
			family, planNum(in.alpha), planNum(in.alpha), planNum(1-math.Pow(1-in.alpha, mf)))
	case stats.Bonferroni:
		return a, fmt.Sprintf("Bonferroni over %s: each is tested at alpha / %d = %s.", family, m, planNum(a))
	case stats.Holm, stats.Hochberg:
		name := "Holm's"
		if in.adjust == stats.Hochberg {
			name = "Hochberg's"
		}
		return a, fmt.Sprintf("%s method over %s, planned at the Bonferroni level alpha / %d = %s: %s method rejects every comparison Bonferroni rejects, so it never needs more units; the plan is conservative and the analysis may reject more.",
			name, family, m, planNum(a), name)
	case stats.BenjaminiHochberg:
		return a, fmt.Sprintf("Benjamini-Hochberg over %s, planned at alpha / %d = %s as a conservative bound: it controls the false discovery rate, not the chance of any false positive, and rejects every comparison with a p-value at most alpha / %d (often more), so fewer units may do when several comparisons have real effects.",
			family, m, planNum(a), m)
	case stats.BenjaminiYekutieli:
		c := 0.0
		for k := 1; k <= m; k++ {
			c += 1 / float64(k)
		}
		a = in.alpha / (mf * c)
		terms := fmt.Sprintf("1 + 1/2 + ... + 1/%d", m)
		if m <= 4 {
			terms = "1"
			for k := 2; k <= m; k++ {
				terms += fmt.Sprintf(" + 1/%d", k)
			}
		}
		return a, fmt.Sprintf("Benjamini-Yekutieli over %s, planned at alpha / (%d x %s) = %s, where %s = %s: the smallest p-value threshold it applies, so it rejects every comparison at or below it and the plan is conservative; alpha / %d would not be enough.",
			family, m, planNum(c), planNum(a), planNum(c), terms, m)
	}
	return a, ""
}

// planResult is the plan as printed and written as JSON.
type planResult struct {
	SolveFor      string  `json:"solve_for"`
	Test          string  `json:"test"`
	Alternative   string  `json:"alternative"`
	BaselineRate  float64 `json:"baseline_rate"`
	TreatmentRate float64 `json:"treatment_rate"`
	// EffectAbsolute is TreatmentRate - BaselineRate; EffectRelative is
	// TreatmentRate / BaselineRate - 1.
	EffectAbsolute     float64 `json:"effect_absolute"`
	EffectRelative     float64 `json:"effect_relative"`
	Alpha              float64 `json:"alpha"`
	Adjustment         string  `json:"adjustment"`
	Comparisons        int     `json:"comparisons"`
	AlphaPerComparison float64 `json:"alpha_per_comparison"`
	// Power is the target power, or the computed one when SolveFor is
	// "power".
	Power float64 `json:"power"`
	Arms  int     `json:"arms"`
	// Metrics is the number of metrics each treatment is compared on.
	Metrics     int   `json:"metrics"`
	UnitsPerArm int64 `json:"units_per_arm"`
	// UnitsPerArmExact is the unrounded solution, when solving for units.
	UnitsPerArmExact *float64 `json:"units_per_arm_exact"`
	TotalUnits       int64    `json:"total_units"`
	DailyUnits       *float64 `json:"daily_units"`
	Days             *int64   `json:"days"`
	Method           string   `json:"method"`
	Notes            []string `json:"notes"`
}

const planMethod = "normal approximation with the pooled variance under H0 (Fleiss, Levin and Paik), equal allocation"

// planCaution is the note every plan ends with.
const planCaution = "The plan holds only if the experiment is read once, at the planned size: looking at the results repeatedly and stopping at the first significant look inflates false positives."

// computePlan solves the plan.
func computePlan(in planInput) (planResult, error) {
	a, adjustNote := comparisonAlpha(in)
	r := planResult{
		SolveFor:           in.solveFor,
		Test:               "pooled two-proportion z test",
		Alternative:        in.alt.String(),
		BaselineRate:       in.baseline,
		Alpha:              in.alpha,
		Adjustment:         in.adjust.String(),
		Comparisons:        (in.arms - 1) * in.metrics,
		AlphaPerComparison: a,
		Power:              in.power,
		Arms:               in.arms,
		Metrics:            in.metrics,
		Method:             planMethod,
	}
	switch in.solveFor {
	case solveUnits:
		p2, err := in.effect.treatmentRate(in.baseline, in.alt)
		if err != nil {
			return r, err
		}
		r.TreatmentRate = p2
		n, err := stats.SampleSizeNormal(p2, in.baseline, a, in.power, in.alt)
		if err != nil {
			return r, usagef("plan: --mde %q: %v", in.effect.text, err)
		}
		if r.UnitsPerArm, err = stats.SampleSizePerArm(p2, in.baseline, a, in.power, in.alt); err != nil {
			return r, usagef("plan: --mde %q is too small to plan for: %v", in.effect.text, err)
		}
		r.UnitsPerArmExact = &n
	case solveEffect:
		r.UnitsPerArm = in.unitsPerArm
		p2, err := stats.DetectableRate(float64(in.unitsPerArm), in.baseline, a, in.power, in.alt)
		if err != nil {
			dir := "up to 100%"
			if in.alt == stats.Less {
				dir = "down to 0%"
			}
			return r, usagef("plan: --units-per-arm %d is too few: no treatment rate %s reaches power %s against a baseline of %s",
				in.unitsPerArm, dir, planPct(in.power), planPct(in.baseline))
		}
		r.TreatmentRate = p2
	case solvePower:
		r.UnitsPerArm = in.unitsPerArm
		p2, err := in.effect.treatmentRate(in.baseline, in.alt)
		if err != nil {
			return r, err
		}
		r.TreatmentRate = p2
		if r.Power, err = stats.PowerNormal(float64(in.unitsPerArm), p2, in.baseline, a, in.alt); err != nil {
			return r, fmt.Errorf("plan: %w", err)
		}
	}
	r.EffectAbsolute = r.TreatmentRate - in.baseline
	r.EffectRelative = r.TreatmentRate/in.baseline - 1
	if r.UnitsPerArm > math.MaxInt64/int64(in.arms) {
		return r, usagef("plan: %d units per arm in %d arms is beyond any experiment", r.UnitsPerArm, in.arms)
	}
	r.TotalUnits = r.UnitsPerArm * int64(in.arms)
	if in.dailyUnits > 0 {
		d := in.dailyUnits
		days := int64(math.Ceil(float64(r.TotalUnits) / d))
		r.DailyUnits, r.Days = &d, &days
	}

	if in.solveFor == solveUnits {
		r.Notes = append(r.Notes, "Method: "+planMethod+"; the units per arm are rounded up.")
	} else {
		r.Notes = append(r.Notes, "Method: "+planMethod+".")
	}
	switch {
	case in.alt != stats.TwoSided:
		r.Notes = append(r.Notes, fmt.Sprintf("One-sided (%s): the plan assumes the effect goes the tested way; a change the other way is never significant.", in.alt))
	case in.solveFor == solveEffect:
		r.Notes = append(r.Notes, "Two-sided: the detectable effect is shown as a rise. To check a drop of a given size, give it as a negative --mde with --units-per-arm.")
	}
	if adjustNote != "" {
		r.Notes = append(r.Notes, adjustNote)
	}
	r.Notes = append(r.Notes, planCaution)
	return r, nil
}

func runPlan(args []string, stdout, stderr io.Writer) error {
	in, f, err := parsePlan(args, stdout, stderr)
	if err != nil {
		return err
	}
	r, err := computePlan(in)
	if err != nil {
		return err
	}
	if f.jsonOut != "" {
		err := report.WriteFileAtomic(f.jsonOut, func(w io.Writer) error {
			enc := json.NewEncoder(w)
			enc.SetIndent("", "  ")
			return enc.Encode(r)
		})
		if err != nil {
			return fmt.Errorf("writing the JSON plan: %w", err)
		}
	}
	if err := writePlanText(stdout, r); err != nil {
		return fmt.Errorf("writing the plan: %w", err)
	}
	return nil
}

// writePlanText writes the plan for a terminal.
func writePlanText(w io.Writer, r planResult) error {
	var b strings.Builder
	alt := map[string]string{
		"two-sided": "two-sided",
		"greater":   "one-sided, treatment higher (greater)",
		"less":      "one-sided, treatment lower (less)",
	}[r.Alternative]
	fmt.Fprintf(&b, "Sample-size plan for the %s, %s\n\n", r.Test, alt)
	row := func(label, value string) { fmt.Fprintf(&b, "  %-27s %s\n", label, value) }
	effect := fmt.Sprintf("%s pp absolute, %s relative (%s to %s)",
		planSigned(planNum(r.EffectAbsolute*100), r.EffectAbsolute), planSigned(planPct(r.EffectRelative), r.EffectRelative),
		planPct(r.BaselineRate), planPct(r.TreatmentRate))
	row("baseline rate", planPct(r.BaselineRate))
	if r.SolveFor != solveEffect {
		row("minimum detectable effect", effect)
	}
	if r.Comparisons == 1 {
		row("alpha", planNum(r.Alpha))
	} else {
		row("alpha", fmt.Sprintf("%s for the family of %d comparisons, %s per comparison (%s)",
			planNum(r.Alpha), r.Comparisons, planNum(r.AlphaPerComparison), r.Adjustment))
	}
	if r.SolveFor != solvePower {
		row("power", planPct(r.Power))
	}
	b.WriteString("\n")
	switch r.SolveFor {
	case solveEffect:
		row("minimum detectable effect", effect)
	case solvePower:
		row("power", planPct(r.Power))
	}
	row("units per arm", planCount(r.UnitsPerArm))
	row("arms", fmt.Sprintf("%d (the control and %d %s, equal sizes)", r.Arms, r.Arms-1, planPlural(r.Arms-1, "treatment", "treatments")))
	row("total units", planCount(r.TotalUnits))
	if r.Days != nil {
		row("days", fmt.Sprintf("%s at %s units a day", planCount(*r.Days), planAmount(*r.DailyUnits)))
	}
	b.WriteString("\n")
	for i, n := range r.Notes {
		if i > 0 {
			b.WriteString("\n")
		}
		b.WriteString(planWrap(n, 76))
	}
	_, err := io.WriteString(w, b.String())
	return err
}

// planNum prints v with at most 4 significant digits and no exponent:
// 0.025, 3841, 1.22.
func planNum(v float64) string {
	r, _ := strconv.ParseFloat(strconv.FormatFloat(v, 'g', 4, 64), 64)
	return strconv.FormatFloat(r, 'f', -1, 64)
}

// planPct prints a rate as a percentage with at most 4 significant
// digits: 0.1 is "10%", 0.11220 is "11.22%".
func planPct(v float64) string { return planNum(v*100) + "%" }

// planAmount prints a whole number with thousands separators and any
// other number in full: 20000 is "20,000", 1234.5 is "1234.5".
func planAmount(v float64) string {
	if v == math.Trunc(v) && math.Abs(v) < 1e15 {
		return planCount(int64(v))
	}
	return strconv.FormatFloat(v, 'f', -1, 64)
}

// planSigned puts a + before a positive formatted value.
func planSigned(s string, v float64) string {
	if v > 0 {
		return "+" + s
	}
	return s
}

// planCount prints a count with comma thousands separators.
func planCount(n int64) string {
	s := strconv.FormatInt(n, 10)
	var b strings.Builder
	for i, c := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteByte(',')
		}
		b.WriteRune(c)
	}
	return b.String()
}

func planPlural(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}

// planWrap breaks s into lines of at most width bytes at spaces (a longer
// word gets a line of its own) and ends it with a newline.
func planWrap(s string, width int) string {
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
