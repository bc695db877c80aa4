package main

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// The hand-made event logs testdata/mistakes/two.csv and one.csv. Their
// counts, by construction (count the lines): checkout-flow-2026 exposes
// u1-u3 in control and u4-u5 in one-page (5 exposure rows), search-ranking
// (not in one.csv) exposes s1 and s2 (2 rows); event rows: exposure 7,
// page_view 4, purchase 3, newsletter_signup 1 (one.csv: 5, 2, 3, 0).
const (
	mistakesTwo = "testdata/mistakes/two.csv"
	mistakesOne = "testdata/mistakes/one.csv"
)

// TestMistakes runs each common mistake through the command: a mistake in
// the names stops the run with exit 3 and a message that lists what the
// log holds (the counts of writeMistakesLog's construction), an ambiguous
// definition with exit 2; nothing is written to stdout then.
func TestMistakes(t *testing.T) {
	dir := t.TempDir()
	two, one := mistakesTwo, mistakesOne
	abs, err := filepath.Abs(two)
	if err != nil {
		t.Fatal(err)
	}
	keyed := []string{"--experiment", "checkout-flow-2026", "--metric", "purchase=purchase:1d"}
	spec := filepath.Join(dir, "spec.toml")
	specText := `[input]
paths = [%q]

[[experiment]]
key = "checkout-flow"

[[experiment.metric]]
name = "purchase"
events = ["purchase"]
window = "1d"
`
	specText = fmt.Sprintf(specText, abs)
	if err := os.WriteFile(spec, []byte(specText), 0o644); err != nil {
		t.Fatal(err)
	}
	allowSpec := filepath.Join(dir, "allow.toml")
	allowText := strings.Replace(specText, `key = "checkout-flow"`, `key = "checkout-flow-2026"
allow_absent_events = ["refund"]`, 1) + `
[[experiment.metric]]
name = "refunds"
events = ["refund"]
`
	if err := os.WriteFile(allowSpec, []byte(allowText), 0o644); err != nil {
		t.Fatal(err)
	}
	eventLines := []string{`"exposure"           7`, `"page_view"          4`, `"purchase"           3`, `"newsletter_signup"  1`}
	armLines := []string{"these arms (exposed units in the analysis window):", `"control"   3`, `"one-page"  2`}
	cases := []struct {
		name   string
		args   []string
		code   int
		stderr []string
	}{
		{"key not found", []string{"analyze", two, "--experiment", "checkout-flow", "--metric", "purchase=purchase:1d"}, exitData,
			[]string{`no exposure row carries the experiment key "checkout-flow" (did you mean "checkout-flow-2026"?)`,
				"these experiment keys (exposure rows):", `"checkout-flow-2026"  5`, `"search-ranking"      2`, "--experiment KEY"}},
		{"key not found, spec file", []string{"analyze", "--spec", spec}, exitData,
			[]string{`experiment "checkout-flow": no exposure row carries`, `"checkout-flow-2026"  5`}},
		{"several keys", []string{"analyze", two, "--metric", "purchase=purchase:1d"}, exitData,
			[]string{"no experiment key given, and the exposure rows carry 2 experiment keys: choose one", `"checkout-flow-2026"  5`, `"search-ranking"      2`}},
		{"one key", []string{"analyze", one, "--metric", "purchase=purchase:1d"}, exitOK,
			[]string{`no experiment key given; the log's exposure rows carry one, "checkout-flow-2026": analysing it`}},
		{"exposure event", append([]string{"analyze", two, "--exposure-event", "exposures"}, keyed...), exitData,
			append([]string{`no row has the exposure event "exposures" (did you mean "exposure"?)`, "--exposure-event EVENT"}, eventLines...)},
		{"control not found", append([]string{"analyze", two, "--control", "ctrl"}, keyed...), exitData,
			append([]string{`the control "ctrl" has no exposed units`, "--control"}, armLines...)},
		{"control in another case", append([]string{"analyze", two, "--control", "Control"}, keyed...), exitData,
			[]string{`the control "Control" has no exposed units (did you mean "control"?)`}},
		{"planned arm", append([]string{"analyze", two, "--arms", "control,one-page,saved-basket"}, keyed...), exitData,
			append([]string{`the planned arm "saved-basket" has no exposed units`}, armLines...)},
		{"metric event", []string{"analyze", two, "--experiment", "checkout-flow-2026", "--metric", "purchase=purchses:1d"}, exitData,
			append([]string{`the event of metric "purchase", "purchses", occurs in no row of the input (did you mean "purchase"?)`, "--allow-absent-event EVENT"}, eventLines...)},
		{"metric event, memory limit", []string{"analyze", two, "--experiment", "checkout-flow-2026", "--metric", "purchase=purchses:1d", "--memory-limit", "1MB"}, exitData,
			append([]string{`"purchses", occurs in no row`}, eventLines...)},
		{"guardrail event", append([]string{"analyze", two, "--guardrail", "refunds=refund:1d~1pp"}, keyed...), exitData,
			append([]string{`the event of guardrail "refunds", "refund", occurs in no row of the input`}, eventLines...)},
		{"allowed absent event", append([]string{"analyze", two, "--guardrail", "refunds=refund:1d~1pp", "--allow-absent-event", "refund"}, keyed...), exitOK, nil},
		{"allowed absent event, spec file", []string{"analyze", "--spec", allowSpec}, exitOK, nil},
		{"allowance for no metric", append([]string{"analyze", two, "--allow-absent-event", "refund"}, keyed...), exitUsage,
			[]string{`--allow-absent-event "refund": no metric or guardrail counts that event`}},
		{"ambiguous metric", []string{"analyze", two, "--experiment", "checkout-flow-2026", "--metric", "s=signup:1d:2d"}, exitUsage,
			[]string{`metric "s=signup:1d:2d" is ambiguous`, `the event "signup:1d" with a 2d window`, "s=signup:1d or s=signup:2d", `events = ["signup:1d"], window = "2d"`}},
		{"ambiguous guardrail", append([]string{"analyze", two, "--guardrail", "r=refund:1d:2d~1pp"}, keyed...), exitUsage,
			[]string{`guardrail "r=refund:1d:2d" is ambiguous`, "r=refund:1d~1pp or r=refund:2d~1pp"}},
		// units.csv: classic u1, u2 in the window (u6 before it), one-step
		// u3, u4, u5, u7; counts.csv: classic 200 units, one-step 210.
		{"planned arm, unit table", []string{"analyze", "--spec", "testdata/spec/units/spec.toml", "--arms", "classic,one-step,two-step"}, exitData,
			[]string{`the planned arm "two-step" has no exposed units`, "these arms (units in the analysis window):", `"one-step"  4`, `"classic"   2`,
				"(1 exposure row of the experiment falls outside the analysis window)"}},
		{"planned arm, counts table", []string{"analyze", "--spec", "testdata/spec/counts/spec.toml", "--arms", "classic,one-step,two-step"}, exitData,
			[]string{`the planned arm "two-step" has no exposed units`, "these arms (units):", `"one-step"  210`, `"classic"   200`}},
	}
	for _, tc := range cases {
		code, stdout, stderr := runCmd(t, tc.args...)
		if code != tc.code {
			t.Errorf("%s: exit %d, want %d; stderr:\n%s", tc.name, code, tc.code, stderr)
			continue
		}
		for _, want := range tc.stderr {
			if !strings.Contains(stderr, want) {
				t.Errorf("%s: stderr\n%s\ndoes not contain %q", tc.name, stderr, want)
			}
		}
		if code != exitOK && stdout != "" {
			t.Errorf("%s: exit %d with a readout on stdout", tc.name, code)
		}
		if code == exitOK && !strings.HasPrefix(stdout, "# ") {
			t.Errorf("%s: no readout on stdout", tc.name)
		}
	}
}

// TestNoExperimentColumn checks that a log without an experiment column
// (testdata/mistakes/nocolumn.csv: one.csv without it, read with
// --experiment-col "") runs as before: no key to name, nothing on stderr.
func TestNoExperimentColumn(t *testing.T) {
	code, md, stderr := runCmd(t, "analyze", "testdata/mistakes/nocolumn.csv", "--experiment-col", "", "--metric", "purchase=purchase:1d")
	if code != exitOK || stderr != "" {
		t.Fatalf("exit %d, stderr %q; want 0 and nothing", code, stderr)
	}
	if title := strings.SplitN(md, "\n", 2)[0]; strings.Contains(title, "checkout-flow-2026") {
		t.Errorf("title %q names a key the log does not have", title)
	}
}

// TestOneKeyNamed checks that a run without --experiment over a log of one
// experiment names it in both readouts.
func TestOneKeyNamed(t *testing.T) {
	out := filepath.Join(t.TempDir(), "r.json")
	code, md, stderr := runCmd(t, "analyze", mistakesOne, "--metric", "purchase=purchase:1d", "--json", out)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if _, doc := readDoc(t, out); doc.Readouts[0].Experiment != "checkout-flow-2026" {
		t.Errorf("JSON experiment %q, want checkout-flow-2026", doc.Readouts[0].Experiment)
	}
	if !strings.HasPrefix(md, "# Experiment `checkout-flow-2026`") {
		t.Errorf("Markdown title: %q", strings.SplitN(md, "\n", 2)[0])
	}
}
