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
// experiment/plan tests the computation against all of them; the tests here
// check that each flag reaches it.

// planOut is the part of the JSON plan these tests look at.
type planOut struct {
	SolveFor           string   `json:"solve_for"`
	Alternative        string   `json:"alternative"`
	Adjustment         string   `json:"adjustment"`
	TreatmentRate      float64  `json:"treatment_rate"`
	AlphaPerComparison float64  `json:"alpha_per_comparison"`
	Power              float64  `json:"power"`
	Comparisons        int      `json:"comparisons"`
	UnitsPerArm        int64    `json:"units_per_arm"`
	UnitsPerArmExact   *float64 `json:"units_per_arm_exact"`
	TotalUnits         int64    `json:"total_units"`
	DailyUnits         *float64 `json:"daily_units"`
	Days               *int64   `json:"days"`
}

// planJSON runs armtally plan with --json and returns the decoded plan.
func planJSON(t *testing.T, args ...string) planOut {
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
	var r planOut
	if err := json.Unmarshal(raw, &r); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return r
}

// planClose reports whether got is within rel |want| of want.
func planClose(got, want, rel float64) bool { return math.Abs(got-want) <= rel*math.Abs(want) }

// TestPlanFlags checks that every flag reaches the plan: the solution
// each command line asks for and the values it passes on.
func TestPlanFlags(t *testing.T) {
	cases := []struct {
		name     string
		args     []string
		solveFor string
		units    int64   // units per arm
		exact    float64 // unrounded units (rel 1e-10), 0 for null
		power    float64 // rel 1e-10
		alphaPer float64 // rel 1e-12
		check    func(planOut) bool
	}{
		// SS-01: p1 = 0.1, p2 = 0.12, alpha 0.05, power 0.8, two-sided.
		{"SS-01 absolute", []string{"--baseline", "10%", "--mde", "2pp"}, "units_per_arm", 3841, 3840.8474824362756, 0.8, 0.05, nil},
		{"SS-01 relative", []string{"--baseline", "0.1", "--mde", "20%"}, "units_per_arm", 3841, 3840.8474824362756, 0.8, 0.05, nil},
		// SS-03: p1 = 0.2, p2 = 0.25, power 0.9 given as a percentage.
		{"SS-03 --power", []string{"--baseline", "20%", "--mde", "25%", "--power", "90%"}, "units_per_arm", 1464, 1463.707305029553, 0.9, 0.05, nil},
		// SS-04: p1 = 0.5, p2 = 0.6 at alpha 0.01, reached through
		// --alpha, --arms, --metrics and --adjust: Bonferroni over 3 arms x
		// 2 metrics = 4 comparisons, 0.04 / 4 = 0.01.
		{"SS-04 --adjust", []string{"--baseline", "50%", "--mde", "10pp", "--alpha", "0.04", "--arms", "3", "--metrics", "2", "--adjust", "bonferroni"},
			"units_per_arm", 577, 576.6680740033802, 0.8, 0.01, func(r planOut) bool { return r.Comparisons == 4 && r.Adjustment == "bonferroni" }},
		// Holm by default, 6 arms: 5 comparisons, 0.05 / 5 = 0.01.
		{"SS-04 default holm", []string{"--baseline", "50%", "--mde", "10pp", "--arms", "6"}, "units_per_arm", 577, 576.6680740033802, 0.8, 0.01,
			func(r planOut) bool { return r.Adjustment == "holm" && r.TotalUnits == 6*577 }},
		// SS-05: p1 = 0.11 down to 0.10 under --alternative less.
		{"SS-05 less", []string{"--baseline", "11%", "--mde", "1pp", "--alternative", "less"}, "units_per_arm", 11620, 11619.069936521051, 0.8, 0.05,
			func(r planOut) bool { return r.Alternative == "less" && planClose(r.TreatmentRate, 0.10, 1e-12) }},
		// SS-08: n = 5000, p1 = 0.1, p2 = 0.11: --mde with --units-per-arm
		// solves for the power.
		{"SS-08 power", []string{"--baseline", "0.1", "--mde", "1pp", "--units-per-arm", "5000"}, "power", 5000, 0, 0.3710889343229116, 0.05, nil},
		// SS-09: n = 10000, p1 = 0.1: --units-per-arm alone solves for the
		// effect, p2 = 0.11220102507438608 (rel 1e-8); 2 x 10000 = 20000
		// units, 20000 / 3000 = 6.67, so 7 days.
		{"SS-09 effect", []string{"--baseline", "10%", "--units-per-arm", "10000", "--daily-units", "3000"}, "detectable_effect", 10000, 0, 0.8, 0.05,
			func(r planOut) bool {
				return planClose(r.TreatmentRate, 0.11220102507438608, 1e-8) && r.Days != nil && *r.Days == 7 && *r.DailyUnits == 3000
			}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			r := planJSON(t, tc.args...)
			if r.SolveFor != tc.solveFor || r.UnitsPerArm != tc.units {
				t.Errorf("solve_for %q, units_per_arm %d; want %q, %d", r.SolveFor, r.UnitsPerArm, tc.solveFor, tc.units)
			}
			if (tc.exact == 0) != (r.UnitsPerArmExact == nil) || (tc.exact != 0 && !planClose(*r.UnitsPerArmExact, tc.exact, 1e-10)) {
				t.Errorf("units_per_arm_exact %v, want %v", r.UnitsPerArmExact, tc.exact)
			}
			if !planClose(r.Power, tc.power, 1e-10) || !planClose(r.AlphaPerComparison, tc.alphaPer, 1e-12) {
				t.Errorf("power %v, alpha_per_comparison %v; want %v, %v", r.Power, r.AlphaPerComparison, tc.power, tc.alphaPer)
			}
			if tc.check != nil && !tc.check(r) {
				t.Errorf("plan %+v fails the case's check", r)
			}
		})
	}
	// Without --daily-units there are no days.
	if r := planJSON(t, "--baseline", "10%", "--mde", "2pp"); r.Days != nil || r.DailyUnits != nil {
		t.Errorf("days %v, daily_units %v without --daily-units; want null", r.Days, r.DailyUnits)
	}
}

// TestPlanText checks that the text plan goes to stdout (report tests its
// content).
func TestPlanText(t *testing.T) {
	// SS-01: 3841 per arm.
	code, stdout, stderr := runCmd(t, "plan", "--baseline", "10%", "--mde", "2pp")
	if code != exitOK || stderr != "" || !strings.HasPrefix(stdout, "Sample-size plan") || !strings.Contains(stdout, "3,841") {
		t.Errorf("exit %d, stderr %q, stdout:\n%s", code, stderr, stdout)
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
		// An effect too small for any experiment: n grows as 1/d^2, about
		// 3841 x (0.02 / 1e-11)^2 ~ 1.5e22 units per arm.
		{"mde too small", []string{"--baseline", "10%", "--mde", "1e-9pp"}, "--mde \"1e-9pp\" is too small to plan for"},
		// 1e-18% of 10% is lost in rounding: nothing to detect.
		{"mde rounds away", []string{"--baseline", "10%", "--mde", "1e-18%"}, "--mde \"1e-18%\": "},
		{"units beyond any experiment", []string{"--baseline", "10%", "--units-per-arm", "9223372036854775807", "--arms", "3"}, "9,223,372,036,854,775,807 units per arm in 3 arms is beyond any experiment"},
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
