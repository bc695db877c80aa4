package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// The check values below come from experiment/REFERENCE-VALUES.md, section
// 11 (sample-size planning), each named by its case id: R 4.2.2
// stats::power.prop.test with tol = 1e-12, the normal approximation with
// the pooled variance under H0, equal allocation, one tail counted. Totals,
// days and per-comparison alphas are hand arithmetic worked out beside them.

// planJSON runs armtally plan with --json and returns the decoded plan.
func planJSON(t *testing.T, args ...string) planResult {
	t.Helper()
	path := filepath.Join(t.TempDir(), "plan.json")
	code, _, stderr := runCmd(t, append([]string{"plan", "--json", path}, args...)...)
	if code != exitOK {
		t.Fatalf("plan %v: exit %d: %s", args, code, stderr)
	}
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var r planResult
	if err := json.Unmarshal(raw, &r); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return r
}

// planClose reports whether got is within rel |want| of want.
func planClose(got, want, rel float64) bool { return math.Abs(got-want) <= rel*math.Abs(want) }

func TestPlanUnitsPerArm(t *testing.T) {
	cases := []struct {
		name  string
		args  []string
		units int64   // exact
		exact float64 // unrounded n, rel 1e-10
		// alphaPer is the per-comparison alpha (rel 1e-12); 0 leaves it
		// unchecked.
		alphaPer float64
	}{
		// SS-01: p1 = 0.1, p2 = 0.12, alpha 0.05, power 0.8, two-sided.
		{"SS-01 absolute", []string{"--baseline", "10%", "--mde", "2pp"}, 3841, 3840.8474824362756, 0.05},
		{"SS-01 relative", []string{"--baseline", "0.1", "--mde", "20%"}, 3841, 3840.8474824362756, 0},
		// SS-01 with the rates swapped (12% down to 10%): the formula is
		// symmetric in p1 and p2.
		{"SS-01 drop", []string{"--baseline", "12%", "--mde", "-2pp"}, 3841, 3840.8474824362756, 0},
		// SS-02: p1 = 0.05, p2 = 0.055.
		{"SS-02", []string{"--baseline", "5%", "--mde", "0.5pp"}, 31234, 31233.43794013004, 0},
		// SS-03: p1 = 0.2, p2 = 0.25, power 0.9.
		{"SS-03", []string{"--baseline", "0.2", "--mde", "5pp", "--power", "0.9"}, 1464, 1463.707305029553, 0},
		{"SS-03 relative, power as percent", []string{"--baseline", "20%", "--mde", "25%", "--power", "90%"}, 1464, 1463.707305029553, 0},
		// SS-04: p1 = 0.5, p2 = 0.6, alpha 0.01, reached directly and
		// through each adjustment's per-comparison alpha.
		{"SS-04", []string{"--baseline", "50%", "--mde", "10pp", "--alpha", "0.01"}, 577, 576.6680740033802, 0.01},
		// Bonferroni, 3 arms: 2 comparisons, 0.02 / 2 = 0.01.
		{"SS-04 bonferroni", []string{"--baseline", "50%", "--mde", "10pp", "--alpha", "0.02", "--arms", "3", "--adjust", "bonferroni"}, 577, 576.6680740033802, 0.01},
		// Holm (the default), 6 arms: 5 comparisons, 0.05 / 5 = 0.01.
		{"SS-04 holm", []string{"--baseline", "50%", "--mde", "10pp", "--arms", "6"}, 577, 576.6680740033802, 0.01},
		// Hochberg, 3 arms x 2 metrics: 4 comparisons, 0.04 / 4 = 0.01.
		{"SS-04 hochberg", []string{"--baseline", "50%", "--mde", "10pp", "--alpha", "0.04", "--arms", "3", "--metrics", "2", "--adjust", "hochberg"}, 577, 576.6680740033802, 0.01},
		// Benjamini-Hochberg, 2 arms x 5 metrics: 5 comparisons, 0.05 / 5.
		{"SS-04 bh", []string{"--baseline", "50%", "--mde", "10pp", "--metrics", "5", "--adjust", "bh"}, 577, 576.6680740033802, 0.01},
		// Benjamini-Yekutieli, 3 arms: m = 2, c(2) = 1 + 1/2 = 1.5,
		// 0.03 / (2 x 1.5) = 0.01.
		{"SS-04 by", []string{"--baseline", "50%", "--mde", "10pp", "--alpha", "0.03", "--arms", "3", "--adjust", "by"}, 577, 576.6680740033802, 0.01},
		// No adjustment: 4 arms, each comparison at alpha 0.01 itself.
		{"SS-04 none", []string{"--baseline", "50%", "--mde", "10pp", "--alpha", "0.01", "--arms", "4", "--adjust", "none"}, 577, 576.6680740033802, 0.01},
		// SS-05: p1 = 0.1, p2 = 0.11, one-sided.
		{"SS-05 greater", []string{"--baseline", "10%", "--mde", "1pp", "--alternative", "greater"}, 11620, 11619.069936521051, 0},
		// SS-05 with the rates swapped: 11% down to 10%, unsigned under
		// less (a drop) and signed.
		{"SS-05 less", []string{"--baseline", "11%", "--mde", "1pp", "--alternative", "less"}, 11620, 11619.069936521051, 0},
		{"SS-05 less signed", []string{"--baseline", "11%", "--mde", "-1pp", "--alternative", "less"}, 11620, 11619.069936521051, 0},
		// SS-06: p1 = 0.5, p2 = 0.75, power 0.9.
		{"SS-06", []string{"--baseline", "0.5", "--mde", "50%", "--power", "0.9"}, 77, 76.70692845177744, 0},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			r := planJSON(t, tc.args...)
			if r.SolveFor != solveUnits {
				t.Errorf("solve_for %q, want %q", r.SolveFor, solveUnits)
			}
			if r.UnitsPerArm != tc.units {
				t.Errorf("units_per_arm %d, want %d", r.UnitsPerArm, tc.units)
			}
			if r.UnitsPerArmExact == nil || !planClose(*r.UnitsPerArmExact, tc.exact, 1e-10) {
				t.Errorf("units_per_arm_exact %v, want %v", r.UnitsPerArmExact, tc.exact)
			}
			if tc.alphaPer != 0 && !planClose(r.AlphaPerComparison, tc.alphaPer, 1e-12) {
				t.Errorf("alpha_per_comparison %v, want %v", r.AlphaPerComparison, tc.alphaPer)
			}
		})
	}
}

func TestPlanPower(t *testing.T) {
	cases := []struct {
		name  string
		args  []string
		power float64 // rel 1e-10
	}{
		// SS-07: n = 50, p1 = 0.5, p2 = 0.75, alpha 0.05, two-sided.
		{"SS-07", []string{"--baseline", "0.5", "--mde", "25pp", "--units-per-arm", "50"}, 0.7401659013313879},
		{"SS-07 relative", []string{"--baseline", "50%", "--mde", "50%", "--units-per-arm", "50"}, 0.7401659013313879},
		// SS-08: n = 5000, p1 = 0.1, p2 = 0.11, alpha 0.05, two-sided.
		{"SS-08", []string{"--baseline", "0.1", "--mde", "1pp", "--units-per-arm", "5000"}, 0.3710889343229116},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			r := planJSON(t, tc.args...)
			if r.SolveFor != solvePower || !planClose(r.Power, tc.power, 1e-10) {
				t.Errorf("solve_for %q, power %v; want %q, %v", r.SolveFor, r.Power, solvePower, tc.power)
			}
		})
	}
}

func TestPlanDetectableEffect(t *testing.T) {
	// SS-09: n = 10000 per arm, p1 = 0.1, alpha 0.05, power 0.8,
	// two-sided: detectable p2 = 0.11220102507438608 (rel 1e-8), so the
	// absolute effect is p2 - 0.1 and the relative one (p2 - 0.1) / 0.1;
	// their tolerances follow from p2's (1e-8 x 0.112 ~ 1.2e-9).
	r := planJSON(t, "--baseline", "10%", "--units-per-arm", "10000")
	if r.SolveFor != solveEffect {
		t.Errorf("solve_for %q, want %q", r.SolveFor, solveEffect)
	}
	if !planClose(r.TreatmentRate, 0.11220102507438608, 1e-8) {
		t.Errorf("treatment_rate %v, want 0.11220102507438608 (SS-09)", r.TreatmentRate)
	}
	if math.Abs(r.EffectAbsolute-0.01220102507438608) > 2e-9 {
		t.Errorf("effect_absolute %v, want 0.01220102507438608 (SS-09)", r.EffectAbsolute)
	}
	if math.Abs(r.EffectRelative-0.1220102507438608) > 2e-8 {
		t.Errorf("effect_relative %v, want 0.1220102507438608 (SS-09)", r.EffectRelative)
	}
	if r.UnitsPerArm != 10000 || r.UnitsPerArmExact != nil {
		t.Errorf("units_per_arm %d, exact %v; want 10000 and null", r.UnitsPerArm, r.UnitsPerArmExact)
	}
}

func TestPlanTotalsAndDays(t *testing.T) {
	cases := []struct {
		name        string
		args        []string
		total, days int64
	}{
		// SS-01: 3841 per arm; 2 x 3841 = 7682; 7682 / 500 = 15.364, so 16.
		{"SS-01 two arms", []string{"--baseline", "10%", "--mde", "2pp", "--daily-units", "500"}, 7682, 16},
		// SS-01 unadjusted in 3 arms: 3 x 3841 = 11523; 11.523 days, so 12.
		{"SS-01 three arms", []string{"--baseline", "10%", "--mde", "2pp", "--arms", "3", "--adjust", "none", "--daily-units", "1000"}, 11523, 12},
		// SS-04 through Holm in 6 arms: 6 x 577 = 3462; 3462 / 1731 = 2
		// exactly, not rounded up.
		{"SS-04 six arms", []string{"--baseline", "50%", "--mde", "10pp", "--arms", "6", "--daily-units", "1731"}, 3462, 2},
		// A given size: 2 x 10000 = 20000; 20000 / 4000 = 5 exactly.
		{"given size", []string{"--baseline", "10%", "--units-per-arm", "10000", "--daily-units", "4000"}, 20000, 5},
		// 2 x 10000 = 20000; 20000 / 3000 = 6.67, so 7.
		{"given size, partial day", []string{"--baseline", "10%", "--mde", "1pp", "--units-per-arm", "10000", "--daily-units", "3000"}, 20000, 7},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			r := planJSON(t, tc.args...)
			if r.TotalUnits != tc.total || r.Days == nil || *r.Days != tc.days {
				t.Errorf("total_units %d, days %v; want %d, %d", r.TotalUnits, r.Days, tc.total, tc.days)
			}
		})
	}
	// Without --daily-units there are no days.
	if r := planJSON(t, "--baseline", "10%", "--mde", "2pp"); r.Days != nil || r.DailyUnits != nil {
		t.Errorf("days %v, daily_units %v without --daily-units; want null", r.Days, r.DailyUnits)
	}
}

// TestPlanText checks that the text plan shows the numbers, the method,
// the note on the adjustment and the caution on repeated looks.
func TestPlanText(t *testing.T) {
	cases := []struct {
		name string
		args []string
		want []string
		not  []string
	}{
		// SS-01: 3841 per arm, 7682 in all, 16 days at 500 (see
		// TestPlanTotalsAndDays).
		{"SS-01", []string{"--baseline", "10%", "--mde", "2pp", "--daily-units", "500"},
			[]string{"3,841", "7,682", "16 at 500 units a day", "+2 pp absolute, +20% relative (10% to 12%)",
				"pooled variance under H0 (Fleiss,", "read once, at the planned size", "inflates false positives"},
			[]string{"comparisons"}},
		{"holm", []string{"--baseline", "10%", "--mde", "2pp", "--arms", "3"},
			[]string{"2 comparisons (2 treatment arms x 1 metric)", "0.025 per comparison (holm)", "Bonferroni level", "conservative"}, nil},
		{"bh", []string{"--baseline", "10%", "--mde", "2pp", "--metrics", "3", "--adjust", "bh"},
			[]string{"conservative bound", "false discovery rate"}, nil},
		// c(3) = 1 + 1/2 + 1/3 = 1.833; 0.05 / (3 x 1.833) = 0.009091.
		{"by", []string{"--baseline", "10%", "--mde", "2pp", "--arms", "4", "--adjust", "by"},
			[]string{"1.833 = 1 + 1/2 + 1/3", "0.009091 per comparison (by)"}, nil},
		// 1 - 0.95^3 = 0.142625.
		{"none", []string{"--baseline", "10%", "--mde", "2pp", "--arms", "4", "--adjust", "none"},
			[]string{"No adjustment", "0.1426 if the comparisons were independent"}, nil},
		// SS-08: power 0.37109 at 5000 per arm.
		{"SS-08 power", []string{"--baseline", "10%", "--mde", "1pp", "--units-per-arm", "5000"},
			[]string{"37.11%", "5,000"}, []string{"rounded up"}},
		// SS-09: detectable p2 = 0.112201 at 10000 per arm.
		{"SS-09 effect", []string{"--baseline", "10%", "--units-per-arm", "10000"},
			[]string{"+1.22 pp absolute, +12.2% relative (10% to 11.22%)", "shown as a rise"}, nil},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			code, stdout, stderr := runCmd(t, append([]string{"plan"}, tc.args...)...)
			if code != exitOK {
				t.Fatalf("exit %d: %s", code, stderr)
			}
			flat := strings.Join(strings.Fields(stdout), " ")
			for _, w := range tc.want {
				if !strings.Contains(flat, w) {
					t.Errorf("output lacks %q:\n%s", w, stdout)
				}
			}
			for _, w := range tc.not {
				if strings.Contains(flat, w) {
					t.Errorf("output has %q:\n%s", w, stdout)
				}
			}
		})
	}
}

// TestPlanErrors checks that bad values are usage errors naming the flag.
func TestPlanErrors(t *testing.T) {
	cases := []struct {
		name   string
		args   []string
		stderr string
	}{
		{"no baseline", []string{"--mde", "2pp"}, "--baseline"},
		{"baseline not a rate", []string{"--baseline", "110%", "--mde", "2pp"}, "--baseline"},
		{"baseline not a number", []string{"--baseline", "ten", "--mde", "2pp"}, "--baseline"},
		{"neither mde nor units", []string{"--baseline", "10%"}, "--mde"},
		{"mde without unit", []string{"--baseline", "10%", "--mde", "0.02"}, "--mde"},
		{"mde zero", []string{"--baseline", "10%", "--mde", "0pp"}, "--mde"},
		{"mde not a number", []string{"--baseline", "10%", "--mde", "twopp"}, "--mde"},
		{"mde double sign", []string{"--baseline", "10%", "--mde", "--2pp"}, "--mde"},
		{"mde beyond 100%", []string{"--baseline", "95%", "--mde", "5pp"}, "--mde"},
		{"mde below 0%", []string{"--baseline", "10%", "--mde", "-100%"}, "--mde"},
		{"mde against greater", []string{"--baseline", "10%", "--mde", "-2pp", "--alternative", "greater"}, "--mde"},
		{"mde against less", []string{"--baseline", "10%", "--mde", "+2pp", "--alternative", "less"}, "--mde"},
		{"alpha", []string{"--baseline", "10%", "--mde", "2pp", "--alpha", "0"}, "--alpha"},
		{"alpha not a number", []string{"--baseline", "10%", "--mde", "2pp", "--alpha", "5%"}, "--alpha"},
		{"power", []string{"--baseline", "10%", "--mde", "2pp", "--power", "1.2"}, "--power"},
		{"power below alpha", []string{"--baseline", "10%", "--mde", "2pp", "--power", "0.01"}, "--power"},
		{"power with both", []string{"--baseline", "10%", "--mde", "2pp", "--units-per-arm", "100", "--power", "0.9"}, "--power"},
		{"alternative", []string{"--baseline", "10%", "--mde", "2pp", "--alternative", "sideways"}, "--alternative"},
		{"arms", []string{"--baseline", "10%", "--mde", "2pp", "--arms", "1"}, "--arms"},
		{"metrics", []string{"--baseline", "10%", "--mde", "2pp", "--metrics", "0"}, "--metrics"},
		{"adjust", []string{"--baseline", "10%", "--mde", "2pp", "--adjust", "fdr"}, "--adjust"},
		{"units zero", []string{"--baseline", "10%", "--units-per-arm", "0"}, "--units-per-arm"},
		{"units not a number", []string{"--baseline", "10%", "--units-per-arm", "many"}, "--units-per-arm"},
		// With 1 unit per arm against 50%, even a treatment at 100% gives
		// z = (1 - 0.5) / sqrt(2 x 0.75 x 0.25) = 0.82 < 1.96.
		{"units too few", []string{"--baseline", "50%", "--units-per-arm", "1"}, "--units-per-arm"},
		{"daily units", []string{"--baseline", "10%", "--mde", "2pp", "--daily-units", "0"}, "--daily-units"},
		{"argument", []string{"--baseline", "10%", "--mde", "2pp", "extra"}, "unexpected arguments extra"},
		{"unknown flag", []string{"--baseline", "10%", "--mde", "2pp", "--sides", "2"}, "unknown flag: --sides"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			code, stdout, stderr := runCmd(t, append([]string{"plan"}, tc.args...)...)
			if code != exitUsage || !strings.Contains(stderr, tc.stderr) || stdout != "" {
				t.Errorf("exit %d, stderr %q, stdout %q; want exit %d, %q in stderr and no output", code, stderr, stdout, exitUsage, tc.stderr)
			}
		})
	}

	// A JSON file that cannot be written is an unexpected failure.
	path := filepath.Join(t.TempDir(), "missing", "plan.json")
	code, _, stderr := runCmd(t, "plan", "--baseline", "10%", "--mde", "2pp", "--json", path)
	if code != exitFailure || !strings.Contains(stderr, "plan.json") {
		t.Errorf("unwritable --json: exit %d, stderr %q; want exit %d naming the file", code, stderr, exitFailure)
	}
}

// TestPlanHelpExamples checks that the help lists plan and that every
// example in plan's help runs.
func TestPlanHelpExamples(t *testing.T) {
	if code, top, _ := runCmd(t, "help"); code != exitOK || !strings.Contains(top, "armtally plan [flags]") {
		t.Errorf("armtally help: exit %d, no plan line:\n%s", code, top)
	}
	code, help, _ := runCmd(t, "help", "plan")
	if code != exitOK || !strings.HasPrefix(help, "Usage: armtally plan") {
		t.Fatalf("help plan: exit %d:\n%s", code, help)
	}
	t.Chdir(t.TempDir()) // an example writes plan.json
	_, examples, _ := strings.Cut(help, "Examples:\n")
	examples, _, _ = strings.Cut(examples, "\n\n")
	n := 0
	for _, line := range strings.Split(examples, "\n") {
		fields := strings.Fields(line)
		if len(fields) < 2 || fields[0] != "armtally" || fields[1] != "plan" {
			continue
		}
		n++
		if code, _, stderr := runCmd(t, fields[1:]...); code != exitOK {
			t.Errorf("example %q: exit %d: %s", line, code, stderr)
		}
	}
	if n < 3 {
		t.Errorf("plan --help has %d examples, want at least 3", n)
	}
	if _, err := os.Stat("plan.json"); err != nil {
		t.Errorf("the --json example wrote nothing: %v", err)
	}
}
