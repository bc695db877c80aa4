package main

import (
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/armtally/armtally/experiment"
)

// The opt-in exit codes on real runs. The demo log's one-page arm truly
// converts on purchase at 12% against the control's 10% (its generator,
// sampledata.DemoConfig), which 20,000 units show: ship, or stop when a
// lower purchase rate is declared better. Its newsletter signups are 4% in
// every arm, so a guardrail with a margin of 0.01 points on them cannot be
// shown, and 2 points can. The skewed log (1,000 units against 1,200,
// chi-square 18.2, p = 2.0e-5 by R 4.2.2 chisq.test(c(1000, 1200))) fails the sample ratio check.
// Every readout is written, whatever the exit code.
func TestOutcomeExitCodes(t *testing.T) {
	dir := t.TempDir()
	skewed := filepath.Join(dir, "skewed.csv")
	var b strings.Builder
	b.WriteString("user_id,ts,event,experiment,arm\n")
	for i := range 2200 {
		arm := "control"
		if i >= 1000 {
			arm = "treat"
		}
		b.WriteString("u" + strconv.Itoa(i) + ",2026-11-02T10:00:00Z,exposure,exp," + arm + "\n")
	}
	if err := os.WriteFile(skewed, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	tight := []string{"--guardrail", "g=newsletter_signup:3d~0.01pp"}
	loose := []string{"--guardrail", "g=newsletter_signup:3d~2pp"}
	lower := []string{"--lower-is-better", "purchase"}
	// buy occurs in no row: the skewed log holds exposures only.
	skewedGuard := []string{"--metric", "buy", "--guardrail", "g=buy~1pp", "--allow-absent-event", "buy"}
	cases := []struct {
		name   string
		args   []string
		code   int
		stderr string
	}{
		{"ship without the flag", []string{"--demo"}, exitOK, ""},
		{"ship", []string{"--demo", "--exit-on-decision"}, exitShip, "decision: ship (checkout-flow-2026: one-page;"},
		{"stop", append([]string{"--demo", "--exit-on-decision"}, lower...), exitStop, "decision: stop (checkout-flow-2026: one-page;"},
		{"wait", []string{"--demo", "--exit-on-decision", "--metric", "signup=newsletter_signup:3d"}, exitOK, ""},
		{"guardrail held", append([]string{"--demo", "--fail-on-guardrail"}, loose...), exitOK, ""},
		{"guardrail not shown", append([]string{"--demo", "--fail-on-guardrail"}, tight...), exitGuardrail,
			"guardrail not held: checkout-flow-2026: g, one-page: guardrail_not_shown"},
		{"guardrail not shown without the flag", append([]string{"--demo"}, tight...), exitOK, ""},
		{"5 before 7", append(append([]string{"--demo", "--fail-on-guardrail", "--exit-on-decision"}, tight...), lower...), exitGuardrail, "guardrail not held"},
		{"5 before 6", append(append([]string{"--demo", "--fail-on-guardrail", "--exit-on-decision"}, tight...), "--metric", "purchase=purchase:7d"), exitGuardrail, "guardrail not held"},
		{"6 when every guardrail held", append([]string{"--demo", "--fail-on-guardrail", "--exit-on-decision"}, loose...), exitShip, "decision: ship"},
		{"fix_data exits 0", []string{skewed, "--metric", "buy", "--allow-absent-event", "buy", "--exit-on-decision"}, exitOK, ""},
		{"4 before 5", append([]string{skewed, "--fail-on-sample-ratio", "--fail-on-guardrail", "--exit-on-decision"}, skewedGuard...), exitSampleRatio, "sample ratio mismatch"},
		{"an unreadable guardrail is not held", append([]string{skewed, "--fail-on-guardrail"}, skewedGuard...), exitGuardrail, "g, treat: check_failed"},
	}
	for _, tc := range cases {
		out := filepath.Join(dir, strings.ReplaceAll(tc.name, " ", "_")+".json")
		code, _, stderr := runCmd(t, append([]string{"analyze", "--json", out, "--out", out + ".md"}, tc.args...)...)
		if code != tc.code || !strings.Contains(stderr, tc.stderr) {
			t.Errorf("%s: exit %d, stderr %q; want exit %d and %q", tc.name, code, stderr, tc.code, tc.stderr)
		}
		for _, p := range []string{out, out + ".md"} {
			if fi, err := os.Stat(p); err != nil || fi.Size() == 0 {
				t.Errorf("%s: readout %s not written: %v", tc.name, p, err)
			}
		}
	}
}

// The order of the exit codes when several apply: 4, then 5, then 7,
// then 6; and a run of several readouts says stop when one stops, even if
// another ships (the order; common practice).
func TestCheckOutcomeOrder(t *testing.T) {
	readout := func(name string, d experiment.Decision, mismatch bool, guard experiment.Outcome) experiment.Readout {
		r := experiment.Readout{Experiment: name, SampleRatio: experiment.SampleRatio{Checked: true, Mismatch: mismatch}}
		r.Verdict = experiment.Verdict{Decision: d, Treatments: []string{"t"},
			Rows: []experiment.VerdictRow{{Metric: "m", Treatment: "t", Outcome: experiment.OutcomeBetter},
				{Metric: "g", Guardrail: true, Treatment: "t", Outcome: guard}}}
		return r
	}
	held, notShown := experiment.OutcomeGuardrailHeld, experiment.OutcomeGuardrailNotShown
	all := outcomeChecks{sampleRatio: true, guardrail: true, decision: true}
	cases := []struct {
		name     string
		checks   outcomeChecks
		readouts []experiment.Readout
		want     int
	}{
		{"nothing applies", all, []experiment.Readout{readout("a", experiment.DecisionWait, false, held)}, exitOK},
		{"all apply", all, []experiment.Readout{readout("a", experiment.DecisionStop, true, notShown), readout("b", experiment.DecisionShip, false, held)}, exitSampleRatio},
		{"5 before 7", all, []experiment.Readout{readout("a", experiment.DecisionStop, false, notShown)}, exitGuardrail},
		{"7 before 6", all, []experiment.Readout{readout("a", experiment.DecisionShip, false, held), readout("b", experiment.DecisionStop, false, held)}, exitStop},
		{"6", all, []experiment.Readout{readout("a", experiment.DecisionShip, false, held), readout("b", experiment.DecisionWait, false, held)}, exitShip},
		{"fix_data is 0 without --fail-on-sample-ratio", outcomeChecks{decision: true},
			[]experiment.Readout{readout("a", experiment.DecisionFixData, true, experiment.OutcomeCheckFailed)}, exitOK},
		{"fix_data beats ship in a run", outcomeChecks{decision: true},
			[]experiment.Readout{readout("a", experiment.DecisionFixData, true, held), readout("b", experiment.DecisionShip, false, held)}, exitOK},
		{"not asked", outcomeChecks{}, []experiment.Readout{readout("a", experiment.DecisionStop, true, notShown)}, exitOK},
	}
	for _, tc := range cases {
		var errOut strings.Builder
		if got := exitCode(checkOutcome(tc.checks, tc.readouts), &errOut); got != tc.want {
			t.Errorf("%s: exit %d (%s), want %d", tc.name, got, errOut.String(), tc.want)
		}
	}
}
