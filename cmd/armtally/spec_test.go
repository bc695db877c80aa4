package main

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/stats"
	"github.com/armtally/armtally/ingest"
)

// TestSpecFileErrors parses every file in testdata/spec/bad. Each starts
// with a comment "# want: TEXT" giving the start of the error it must
// produce; the line numbers in TEXT were counted by hand in the file.
func TestSpecFileErrors(t *testing.T) {
	files, err := filepath.Glob(filepath.Join("testdata", "spec", "bad", "*.toml"))
	if err != nil || len(files) == 0 {
		t.Fatalf("no bad spec files: %v", err)
	}
	for _, path := range files {
		data, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		first, _, _ := strings.Cut(string(data), "\n")
		want, ok := strings.CutPrefix(first, "# want: ")
		if !ok {
			t.Fatalf("%s: first line is not '# want: ...'", path)
		}
		_, err = parseSpecFile(filepath.Base(path), data)
		if err == nil {
			t.Errorf("%s: parsed without error, want %q", path, want)
			continue
		}
		if !strings.HasPrefix(err.Error(), want) {
			t.Errorf("%s:\n got  %q\n want %q...", path, err.Error(), want)
		}
	}
}

// TestSpecFileErrorsExit checks that a bad spec file is a usage error
// (exit 2) whose message names the file as given, the line and the key.
func TestSpecFileErrorsExit(t *testing.T) {
	path := filepath.Join("testdata", "spec", "bad", "split-arms.toml")
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

// TestExampleSpec parses the annotated example and checks the values it
// sets, read off the file itself, and that it documents every key.
func TestExampleSpec(t *testing.T) {
	path := filepath.Join("testdata", "spec", "example.toml")
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	sf, err := parseSpecFile(path, data)
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join("testdata", "spec")
	if got, want := sf.paths, []string{filepath.Join(dir, "exports/2027-03")}; !equalStrings(got, want) {
		t.Errorf("paths = %q, want %q (relative to the file's folder)", got, want)
	}
	wantMapping := ingest.Mapping{User: "visitor_id", TS: "event_time", Event: "event_name", Experiment: "test_key",
		Arm: "variant", EpochUnit: "ms", Segments: []string{"platform", "city_size"}}
	if m := sf.mapping; m.User != wantMapping.User || m.TS != wantMapping.TS || m.Event != wantMapping.Event ||
		m.Experiment != wantMapping.Experiment || m.Arm != wantMapping.Arm || m.EpochUnit != wantMapping.EpochUnit ||
		!equalStrings(m.Segments, wantMapping.Segments) {
		t.Errorf("mapping = %+v, want %+v", m, wantMapping)
	}
	if sf.markdown != filepath.Join(dir, "readout.md") || sf.json != filepath.Join(dir, "readout.json") ||
		sf.audit != filepath.Join(dir, "audit.parquet") ||
		sf.failOnSampleRatio == nil || !*sf.failOnSampleRatio {
		t.Errorf("output = %q, %q, %v", sf.markdown, sf.json, sf.failOnSampleRatio)
	}
	if err := sf.unsupported(); err != nil {
		t.Errorf("the example uses a key that is not supported yet: %v", err)
	}
	if len(sf.experiments) != 2 {
		t.Fatalf("%d experiments, want 2", len(sf.experiments))
	}
	spec, opts, err := sf.experiments[0].build()
	if err != nil {
		t.Fatal(err)
	}
	start := time.Date(2027, 3, 1, 0, 0, 0, 0, time.UTC)
	end := time.Date(2027, 3, 29, 0, 0, 0, 0, time.UTC)
	if spec.Key != "booking-form-2027" || spec.ExposureEvent != "assigned" || spec.Control != "classic-form" ||
		!equalStrings(spec.Arms, []string{"classic-form", "one-step-form", "calendar-first"}) ||
		len(spec.Split) != 3 || spec.Split[0] != 50 || spec.Split[1] != 25 || spec.Split[2] != 25 ||
		spec.Start == nil || !spec.Start.Equal(start) || spec.End == nil || !spec.End.Equal(end) ||
		spec.MultiArm != experiment.MultiArmExclude || spec.Maturity != experiment.MaturityExclude ||
		!equalStrings(spec.Segments, []string{"platform"}) {
		t.Errorf("experiment[0] = %+v", spec)
	}
	if opts.Stats.Alpha != 0.05 || opts.Stats.Alternative != stats.TwoSided || opts.Adjust != stats.Holm ||
		opts.Interval != experiment.IntervalWilson || opts.Difference != experiment.DifferenceNewcombe ||
		opts.NonInferiority != stats.FarringtonManning || opts.Stats.MinCount != 5 || opts.SampleRatioThreshold != 0.001 {
		t.Errorf("experiment[0] options = %+v", opts)
	}
	// Metrics: the primary one first. 0.5pp is 0.005 and 30% is 0.3 by
	// definition; 7d is 168 hours.
	if len(spec.Metrics) != 3 {
		t.Fatalf("metrics = %+v", spec.Metrics)
	}
	booked, signedUp, cancelled := spec.Metrics[0], spec.Metrics[1], spec.Metrics[2]
	if booked.Name != "booked" || !equalStrings(booked.Events, []string{"booking_confirmed"}) || booked.Window != 168*time.Hour ||
		booked.Target == nil || *booked.Target != 0.3 || booked.LowerIsBetter || booked.Guardrail != nil {
		t.Errorf("booked = %+v", booked)
	}
	if signedUp.Name != "signed_up" || !equalStrings(signedUp.Events, []string{"account_created", "newsletter_joined"}) ||
		signedUp.Window != 72*time.Hour || signedUp.Target != nil || signedUp.Guardrail != nil {
		t.Errorf("signed_up = %+v", signedUp)
	}
	if cancelled.Name != "cancelled" || cancelled.Window != 14*24*time.Hour || !cancelled.LowerIsBetter ||
		cancelled.Guardrail == nil || *cancelled.Guardrail != (experiment.Margin{Value: 0.005}) {
		t.Errorf("cancelled = %+v", cancelled)
	}
	spec2, _, err := sf.experiments[1].build()
	if err != nil {
		t.Fatal(err)
	}
	if spec2.Key != "reminder-sms-2027" || len(spec2.Split) != 0 || !spec2.Start.Equal(time.Date(2027, 3, 8, 0, 0, 0, 0, time.UTC)) ||
		len(spec2.Metrics) != 1 || spec2.Metrics[0].Window != 72*time.Hour {
		t.Errorf("experiment[1] = %+v", spec2)
	}

	// Every key is shown in the example (set, or commented out where a
	// value would need another shape or a feature still being built), and
	// 'armtally help spec' prints the example.
	code, help, _ := runCmd(t, "help", "spec")
	if code != exitOK || !strings.Contains(help, string(data)) {
		t.Errorf("help spec: exit %d, does not print the example", code)
	}
	tables := map[string]bool{"input": true, "columns": true, "output": true, "experiment": true, "experiment.metric": true}
	for _, key := range documentedKeys() {
		if tables[key] {
			if !strings.Contains(string(data), "["+key+"]") {
				t.Errorf("example.toml has no table %s", key)
			}
			continue
		}
		name := key[strings.LastIndexByte(key, '.')+1:]
		re := regexp.MustCompile(`(?m)^(# )?` + regexp.QuoteMeta(name) + ` = `)
		if !re.MatchString(string(data)) {
			t.Errorf("example.toml does not show %s", key)
		}
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
// are refused by the run with "not supported yet: KEY" and the line.
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
	// The values armtally uses anyway are accepted.
	dir := t.TempDir()
	path := filepath.Join(dir, "s.toml")
	text := "[input]\nshape = \"events\"\ndelimiter = \",\"\nmax_bad_rows = 0\nmax_bad_share = 0.0\n" + experimentTable
	if err := os.WriteFile(path, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	sf, err := readSpecFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := sf.unsupported(); err != nil {
		t.Errorf("defaults refused: %v", err)
	}
}

// TestSpecOverrides checks that flags the user set override the spec file
// and that flags left at their defaults do not.
func TestSpecOverrides(t *testing.T) {
	spec := filepath.Join("testdata", "spec", "example.toml")
	parse := func(args ...string) (*analyzeRun, error) {
		t.Helper()
		return parseAnalyze(append([]string{"--spec", spec}, args...), &bytes.Buffer{}, &bytes.Buffer{})
	}
	// The example's input folder does not exist; FILE arguments replace it.
	dir := t.TempDir()
	csvPath := filepath.Join(dir, "log.csv")
	if err := os.WriteFile(csvPath, []byte("visitor_id,event_time,event_name,test_key,variant\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := parse(); err == nil || !strings.Contains(err.Error(), filepath.Join("testdata", "spec", "exports", "2027-03")) {
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
	if run.jsonOut != "" || run.out != filepath.Join("testdata", "spec", "readout.md") || !run.failOnSampleRatio {
		t.Errorf("outputs = %q, %q, %v", run.out, run.jsonOut, run.failOnSampleRatio)
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
