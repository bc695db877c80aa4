package main

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/armtally/armtally/experiment/specfile"
)

// exampleSpec is the annotated example spec file of package specfile.
var exampleSpec = filepath.Join("..", "..", "experiment", "specfile", "testdata", "example.toml")

// TestSpecFileErrorsExit checks that a bad spec file is a usage error
// (exit 2) whose message names the file as given, the line and the key.
func TestSpecFileErrorsExit(t *testing.T) {
	path := filepath.Join("..", "..", "experiment", "specfile", "testdata", "bad", "split-arms.toml")
	code, _, stderr := runCmd(t, "analyze", "--spec", path)
	want := path + ":5: experiment[0].split: 2 shares for 3 arms"
	if code != exitUsage || !strings.Contains(stderr, want) {
		t.Errorf("exit %d, stderr %q; want exit %d and %q", code, stderr, exitUsage, want)
	}
	code, _, stderr = runCmd(t, "analyze", "--spec", filepath.Join("testdata", "spec", "no-such.toml"))
	if code != exitUsage || !strings.Contains(stderr, "no-such.toml") {
		t.Errorf("missing spec file: exit %d, stderr %q", code, stderr)
	}
}

// TestHelpSpec checks that 'armtally help spec' prints the rules and the
// example spec file.
func TestHelpSpec(t *testing.T) {
	example, err := os.ReadFile(exampleSpec)
	if err != nil {
		t.Fatal(err)
	}
	code, help, _ := runCmd(t, "help", "spec")
	if code != exitOK || help != specfile.Help() || !strings.HasSuffix(help, string(example)) ||
		!strings.HasPrefix(help, "armtally analyze --spec FILE reads an experiment spec") {
		t.Errorf("help spec: exit %d, does not print the rules and the example", code)
	}
}

func equalStrings(a, b []string) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// TestSpecUnsupported checks that keys whose feature is still being built
// are refused by the run with "not supported yet: KEY" and the line, a
// usage error.
func TestSpecUnsupported(t *testing.T) {
	const experimentTable = "\n[[experiment]]\nkey = \"bike-bell-2027\"\n[[experiment.metric]]\nname = \"rang\"\nevents = [\"bell_rung\"]\n"
	const tableExperiment = "\n[[experiment]]\nkey = \"bike-bell-2027\"\n[[experiment.metric]]\nname = \"rang\"\n"
	cases := []struct {
		name, text, want string
	}{
		{"budget of a table", "[input]\nshape = \"counts\"\nmax_bad_rows = 5\n" + tableExperiment, "s.toml:3: not supported yet: input.max_bad_rows"},
		{"delimiter of a table", "[input]\nshape = \"units\"\ndelimiter = \";\"\n" + tableExperiment, "s.toml:3: not supported yet: input.delimiter"},
	}
	for _, tc := range cases {
		dir := t.TempDir()
		path := filepath.Join(dir, "s.toml")
		text := tc.text
		if !strings.Contains(text, "[[experiment]]") {
			text += experimentTable
		}
		if err := os.WriteFile(path, []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
		code, _, stderr := runCmd(t, "analyze", "--spec", path, "--demo")
		if code != exitUsage || !strings.Contains(stderr, tc.want) {
			t.Errorf("%s: exit %d, stderr %q; want exit %d and %q", tc.name, code, stderr, exitUsage, tc.want)
		}
	}
}

// TestSpecOverrides checks that flags the user set override the spec file
// and that flags left at their defaults do not.
func TestSpecOverrides(t *testing.T) {
	spec := exampleSpec
	parse := func(args ...string) (*analyzeRun, error) {
		t.Helper()
		return parseAnalyze(append([]string{"--spec", spec}, args...), &bytes.Buffer{}, &bytes.Buffer{})
	}
	// The example's input.paths is its folder of example data; FILE
	// arguments replace it.
	dir := t.TempDir()
	csvPath := filepath.Join(dir, "log.csv")
	if err := os.WriteFile(csvPath, []byte("visitor_id,event_time,event_name,test_key,variant\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	if run, err := parse(); err != nil || len(run.sources) != 1 || run.sources[0].Name != exampleLog {
		t.Errorf("input.paths not used: %v", err)
	}

	run, err := parse(csvPath, "--alpha", "0.01", "--user-col", "member", "--json", "")
	if err != nil {
		t.Fatal(err)
	}
	if len(run.sources) != 1 || run.sources[0].Name != csvPath {
		t.Errorf("sources = %+v, want the argument", run.sources)
	}
	if len(run.experiments) != 2 {
		t.Fatalf("%d experiments, want 2", len(run.experiments))
	}
	for _, e := range run.experiments {
		if e.opts.Stats.Alpha != 0.01 {
			t.Errorf("%s: alpha %v, want the flag's 0.01", e.spec.Key, e.opts.Stats.Alpha)
		}
		if e.spec.ExposureEvent != "assigned" {
			t.Errorf("%s: exposure event %q, want the file's (the flag was not set)", e.spec.Key, e.spec.ExposureEvent)
		}
	}
	if run.experiments[0].spec.Control != "classic-form" || len(run.experiments[0].spec.Metrics) != 3 {
		t.Errorf("experiment[0] lost the file's control or metrics: %+v", run.experiments[0].spec)
	}
	if m := run.mapping; m.User != "member" || m.TS != "event_time" || m.EpochUnit != "ms" {
		t.Errorf("mapping = %+v: want the flag's user column and the file's others", m)
	}
	if run.jsonOut != "" || run.out != filepath.Join(filepath.Dir(exampleSpec), "readout.md") || !run.checks.sampleRatio {
		t.Errorf("outputs = %q, %q, %v", run.out, run.jsonOut, run.checks.sampleRatio)
	}

	// --experiment picks one; then --arms, --split and --metric apply to it.
	run, err = parse(csvPath, "--experiment", "reminder-sms-2027", "--arms", "no-reminder,sms-reminder,call-reminder",
		"--split", "2,1,1", "--metric", "came=repair_started:1d", "--start", "2027-03-09")
	if err != nil {
		t.Fatal(err)
	}
	if len(run.experiments) != 1 {
		t.Fatalf("%d experiments, want 1", len(run.experiments))
	}
	s := run.experiments[0].spec
	if s.Key != "reminder-sms-2027" || len(s.Arms) != 3 || len(s.Split) != 3 || len(s.Metrics) != 1 ||
		s.Metrics[0].Name != "came" || !s.Start.Equal(time.Date(2027, 3, 9, 0, 0, 0, 0, time.UTC)) ||
		!s.End.Equal(time.Date(2027, 3, 29, 0, 0, 0, 0, time.UTC)) {
		t.Errorf("overridden spec = %+v", s)
	}

	// lineOf finds the line of text in the example, counting from 1.
	example, err := os.ReadFile(spec)
	if err != nil {
		t.Fatal(err)
	}
	lineOf := func(text string) string {
		before, _, ok := strings.Cut(string(example), "\n"+text+"\n")
		if !ok {
			t.Fatalf("example.toml has no line %q", text)
		}
		return fmt.Sprint(strings.Count(before, "\n") + 2)
	}
	errs := []struct {
		name string
		args []string
		want string
	}{
		{"unknown experiment", []string{"--experiment", "nope"}, `--experiment "nope": ` + spec + ` has no such experiment (it has booking-form-2027, reminder-sms-2027)`},
		{"arms for two", []string{"--arms", "a,b"}, "--arms applies to one experiment"},
		{"split for two", []string{"--split", "1,1"}, "--split applies to one experiment"},
		{"arms against the file's split", []string{"--experiment", "booking-form-2027", "--arms", "classic-form,one-step-form"},
			spec + ":" + lineOf("split = [50, 25, 25]") + ": experiment[0].split: 3 shares for 2 arms (classic-form, one-step-form, from --arms)"},
		{"end before the file's start", []string{"--end", "2027-03-01"}, "analyze: --end: the window ends at 2027-03-01T00:00:00Z, not after its start 2027-03-01T00:00:00Z (" + spec + ":" + lineOf("start = 2027-03-01") + ": experiment[0].start)"},
		{"control outside the file's arms", []string{"--control", "phone"}, `the control "phone" (--control) is not among the arms`},
		{"bad flag value", []string{"--alpha", "2"}, "--alpha"},
		{"lower-is-better unknown", []string{"--lower-is-better", "refunds"}, `--lower-is-better "refunds": no metric of that name`},
	}
	for _, tc := range errs {
		_, err := parse(append([]string{csvPath}, tc.args...)...)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: error %v, want %q", tc.name, err, tc.want)
		}
	}
}
