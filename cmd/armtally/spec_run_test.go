package main

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/parquet-go/parquet-go"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/report"
)

// readReadouts reads a JSON readout document with any number of readouts.
func readReadouts(t *testing.T, path string) ([]byte, []report.JSONReadout) {
	t.Helper()
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Readouts []report.JSONReadout `json:"readouts"`
	}
	if err := json.Unmarshal(raw, &doc); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return raw, doc.Readouts
}

// reasonCount returns the count of reason in rs.
func reasonCount(rs []report.JSONReasonCount, reason string) int64 {
	for _, r := range rs {
		if r.Reason == reason {
			return r.Count
		}
	}
	return 0
}

// TestSpecTwoExperiments runs the spec testdata/spec/two/spec.toml: two
// experiments in one hand-made log of 18 rows, read in one pass. The
// counts below are worked out by hand from events.csv:
//
// booking-form (booked = booking_confirmed within 7 days):
//
//	classic:  v1 (exposed 03-01 10:00, booked 03-02 09:00: converted),
//	          v2 (no booking)                              -> 2 units, 1
//	one-step: v3 (03-01 12:00, booked 03-03 08:00: converted),
//	          v4 (03-02 09:00, booked 03-12 09:00, after 03-09 09:00: not),
//	          v5 (03-02 09:00, booked 03-02 10:00: converted) -> 3 units, 2
//	5 exposure rows of the key, 4 of the other key; v8's booking is of a
//	unit never exposed; v4's is outside its attribution window.
//
// reminder-sms (showed_up = repair_started within 3 days):
//
//	none: v2 (exposed 03-01 11:00, repair 03-05 12:00, after 03-04 11:00:
//	      not), v6 (03-03 09:00, repair 03-04 09:00: converted) -> 2, 1
//	sms:  v1 (03-01 10:30, repair 03-02 12:00: converted), v7 (none) -> 2, 1
//	4 exposure rows of the key, 5 of the other; v2's repair is outside
//	its window.
//
// Every unit's window closes by 03-09 09:00, before the end 03-20: none is
// immature.
func TestSpecTwoExperiments(t *testing.T) {
	dir := t.TempDir()
	jsonPath, mdPath := filepath.Join(dir, "readout.json"), filepath.Join(dir, "readout.md")
	spec := filepath.Join("testdata", "spec", "two", "spec.toml")
	code, _, stderr := runCmd(t, "analyze", "--spec", spec, "--json", jsonPath, "--out", mdPath)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	raw, rs := readReadouts(t, jsonPath)
	validate(t, raw)
	if len(rs) != 2 || rs[0].Experiment != "booking-form" || rs[1].Experiment != "reminder-sms" {
		t.Fatalf("readouts: %d, want booking-form then reminder-sms", len(rs))
	}
	type armCount struct {
		arm                string
		units, conversions int64
	}
	want := []struct {
		metric                                         string
		arms                                           []armCount
		exposureRows, otherRows, neverExposed, outside int64
	}{
		{"booked", []armCount{{"classic", 2, 1}, {"one-step", 3, 2}}, 5, 4, 1, 1},
		{"showed_up", []armCount{{"none", 2, 1}, {"sms", 2, 1}}, 4, 5, 0, 1},
	}
	for i, r := range rs {
		w := want[i]
		if len(r.Metrics) != 1 || r.Metrics[0].Name != w.metric {
			t.Fatalf("%s: metrics %+v, want %s", r.Experiment, r.Metrics, w.metric)
		}
		m := r.Metrics[0]
		if len(m.Arms) != len(w.arms) {
			t.Fatalf("%s: %d arms, want %d", r.Experiment, len(m.Arms), len(w.arms))
		}
		for j, a := range m.Arms {
			if a.Arm != w.arms[j].arm || a.Units != w.arms[j].units || a.Conversions != w.arms[j].conversions || a.Immature != 0 {
				t.Errorf("%s/%s: %d units, %d conversions, %d immature; want %+v", r.Experiment, a.Arm, a.Units, a.Conversions, a.Immature, w.arms[j])
			}
		}
		d := r.Diagnostics
		if d.RowsRead != 18 || d.ExposureRows != w.exposureRows ||
			reasonCount(d.IgnoredEvents, experiment.ReasonOtherExperiment) != w.otherRows ||
			reasonCount(d.IgnoredEvents, experiment.ReasonUnitNeverExposed) != w.neverExposed ||
			reasonCount(d.IgnoredEvents, experiment.ReasonOutsideAttributed) != w.outside {
			t.Errorf("%s: diagnostics %+v", r.Experiment, d)
		}
	}
	md, err := os.ReadFile(mdPath)
	if err != nil {
		t.Fatal(err)
	}
	for _, h := range []string{"# Experiment `booking-form`", "# Experiment `reminder-sms`"} {
		if !strings.Contains(string(md), h) {
			t.Errorf("Markdown has no heading %q", h)
		}
	}

	// --experiment picks one of them.
	one := filepath.Join(dir, "one.json")
	code, _, stderr = runCmd(t, "analyze", "--spec", spec, "--experiment", "reminder-sms", "--json", one, "--out", filepath.Join(dir, "one.md"))
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if _, rs := readReadouts(t, one); len(rs) != 1 || rs[0].Experiment != "reminder-sms" {
		t.Errorf("--experiment reminder-sms gave %d readouts", len(rs))
	}
}

// TestSpecSampleRatioExit plans a 99:1 split for reminder-sms, whose arms
// have 2 and 2 units: chi-square = (2 - 3.96)^2 / 3.96 + (2 - 0.04)^2 / 0.04
// = 0.970 + 96.04 = 97.0 on 1 degree of freedom, p about 7e-23, far below
// 0.001 (hand calculation). booking-form, 2 against 3 units under an equal
// split, gives chi-square 0.2, p = 0.65. The run exits with code 4 and
// still writes both readouts.
func TestSpecSampleRatioExit(t *testing.T) {
	dir := t.TempDir()
	src, err := os.ReadFile(filepath.Join("testdata", "spec", "two", "spec.toml"))
	if err != nil {
		t.Fatal(err)
	}
	csvPath, err := filepath.Abs(filepath.Join("testdata", "spec", "two", "events.csv"))
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(src), `paths = ["events.csv"]`, `paths = [`+strconvQuote(csvPath)+`]`, 1)
	text = strings.Replace(text, `arms = ["none", "sms"]`, "arms = [\"none\", \"sms\"]\nsplit = [99, 1]", 1)
	text = strings.Replace(text, "[input]", "[output]\njson = \"readout.json\"\nmarkdown = \"readout.md\"\nfail_on_sample_ratio = true\n\n[input]", 1)
	spec := filepath.Join(dir, "spec.toml")
	if err := os.WriteFile(spec, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	code, _, stderr := runCmd(t, "analyze", "--spec", spec)
	if code != exitSampleRatio || !strings.Contains(stderr, "sample ratio mismatch in 1 of 2 experiments (reminder-sms: p = ") {
		t.Errorf("exit %d, stderr %q; want exit %d naming reminder-sms", code, stderr, exitSampleRatio)
	}
	_, rs := readReadouts(t, filepath.Join(dir, "readout.json")) // output paths are relative to the spec file
	if len(rs) != 2 || rs[0].SampleRatio.Mismatch || !rs[1].SampleRatio.Mismatch {
		t.Errorf("sample ratio: %d readouts, %+v", len(rs), rs)
	}
	if _, err := os.Stat(filepath.Join(dir, "readout.md")); err != nil {
		t.Errorf("Markdown readout not written: %v", err)
	}
	// The flag turns it off again.
	code, _, stderr = runCmd(t, "analyze", "--spec", spec, "--fail-on-sample-ratio=false")
	if code != exitOK {
		t.Errorf("--fail-on-sample-ratio=false: exit %d: %s", code, stderr)
	}
}

// strconvQuote quotes a path as a TOML basic string.
func strconvQuote(s string) string {
	b, _ := json.Marshal(s)
	return string(b)
}

// twoCounts checks the readouts of the two-experiment log against the
// counts worked out by hand in TestSpecTwoExperiments.
func twoCounts(t *testing.T, rs []report.JSONReadout) {
	t.Helper()
	want := map[string]map[string][2]int64{
		"booking-form": {"classic": {2, 1}, "one-step": {3, 2}},
		"reminder-sms": {"none": {2, 1}, "sms": {2, 1}},
	}
	if len(rs) != 2 {
		t.Fatalf("%d readouts, want 2", len(rs))
	}
	for _, r := range rs {
		for _, a := range r.Metrics[0].Arms {
			if w := want[r.Experiment][a.Arm]; a.Units != w[0] || a.Conversions != w[1] {
				t.Errorf("%s/%s: %d units, %d conversions; want %d, %d", r.Experiment, a.Arm, a.Units, a.Conversions, w[0], w[1])
			}
		}
	}
}

// TestSpecInputOptions reads the two-experiment log written with ';' into
// a key=value folder, through a pattern, with a bad-row budget, and checks
// the hand-worked counts of TestSpecTwoExperiments, the bad rows counted
// by reason, and the errors of a budget overrun and of a missing partition.
func TestSpecInputOptions(t *testing.T) {
	src, err := os.ReadFile(filepath.Join("testdata", "spec", "two", "spec.toml"))
	if err != nil {
		t.Fatal(err)
	}
	log, err := os.ReadFile(filepath.Join("testdata", "spec", "two", "events.csv"))
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	part := filepath.Join(dir, "exports", "dt=2027-03-20")
	if err := os.MkdirAll(part, 0o755); err != nil {
		t.Fatal(err)
	}
	// Two bad rows: a timestamp that does not parse (line 20) and an empty
	// one (line 21).
	semi := strings.ReplaceAll(string(log), ",", ";") +
		"v9;yesterday;assigned;booking-form;classic\n" +
		"v10;;booking_confirmed;;\n"
	if err := os.WriteFile(filepath.Join(part, "events.csv"), []byte(semi), 0o644); err != nil {
		t.Fatal(err)
	}
	spec := func(input string) string {
		text := strings.Replace(string(src), `paths = ["events.csv"]`, input, 1)
		path := filepath.Join(dir, "spec.toml")
		if err := os.WriteFile(path, []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
		return path
	}
	const base = "paths = [\"exports/dt=*/*.csv\"]\ndelimiter = \";\"\npartition_columns = [\"dt\"]\n"
	out := filepath.Join(dir, "readout.json")
	code, _, stderr := runCmd(t, "analyze", "--spec", spec(base+"max_bad_rows = 2"), "--json", out, "--out", filepath.Join(dir, "readout.md"))
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	_, rs := readReadouts(t, out)
	twoCounts(t, rs)
	for _, r := range rs {
		d := r.Diagnostics
		if d.RowsRead != 20 || reasonCount(d.BadRows, "bad_timestamp") != 1 || reasonCount(d.BadRows, "null_timestamp") != 1 {
			t.Errorf("%s: %d rows read, bad rows %+v; want 20 and one bad_timestamp, one null_timestamp", r.Experiment, d.RowsRead, d.BadRows)
		}
	}

	errs := []struct {
		name, input string
		args        []string
		code        int
		want        string
	}{
		{"budget overrun", base + "max_bad_rows = 1", nil, exitData, "bad-row budget exceeded: 2 bad rows, more than the 1 allowed"},
		{"share overrun", base + "max_bad_share = 0.05", nil, exitData, "bad-row budget exceeded: 2 bad rows of 20 read (10%), more than the 5% allowed"},
		{"flag overrides the budget", base + "max_bad_rows = 2", []string{"--max-bad-rows", "0"}, exitData, `dt=2027-03-20/events.csv:20: column "event_time": cannot parse "yesterday"`},
		{"missing partition", "paths = [\"exports\"]\ndelimiter = \";\"\nmax_bad_rows = -1\npartition_columns = [\"dt\", \"country\"]\n", nil, exitData,
			fmt.Sprintf("no partition folder country=... on its path (input.partition_columns at %s:7; its partitions: dt)", filepath.Join(dir, "spec.toml"))},
		{"wrong delimiter", "paths = [\"exports\"]\n", nil, exitData, `missing column`},
	}
	for _, tc := range errs {
		args := append([]string{"analyze", "--spec", spec(tc.input), "--out", filepath.Join(dir, "x.md")}, tc.args...)
		code, _, stderr := runCmd(t, args...)
		if code != tc.code || !strings.Contains(stderr, tc.want) {
			t.Errorf("%s: exit %d, stderr %q; want exit %d and %q", tc.name, code, stderr, tc.code, tc.want)
		}
	}
}

// TestSpecSegments breaks booking-form down by platform: the log of
// TestSpecTwoExperiments with a platform column (v1, v3, v5, v7, v8 on
// ios; v2, v4, v6 on android). By hand, from the counts worked out there:
//
//	ios:     classic v1 (converted) -> 1 unit, 1; one-step v3, v5 (both
//	         converted) -> 2 units, 2
//	android: classic v2 (not) -> 1 unit, 0; one-step v4 (not) -> 1, 0
func TestSpecSegments(t *testing.T) {
	src, err := os.ReadFile(filepath.Join("testdata", "spec", "two", "spec.toml"))
	if err != nil {
		t.Fatal(err)
	}
	log, err := os.ReadFile(filepath.Join("testdata", "spec", "two", "events.csv"))
	if err != nil {
		t.Fatal(err)
	}
	platform := map[string]string{"v1": "ios", "v3": "ios", "v5": "ios", "v7": "ios", "v8": "ios", "v2": "android", "v4": "android", "v6": "android"}
	var b strings.Builder
	for i, line := range strings.Split(strings.TrimSpace(string(log)), "\n") {
		user, _, _ := strings.Cut(line, ",")
		if i == 0 {
			b.WriteString(line + ",platform\n")
			continue
		}
		b.WriteString(line + "," + platform[user] + "\n")
	}
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "events.csv"), []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(src), "arm = \"variant\"\n", "arm = \"variant\"\nsegments = [\"platform\"]\n", 1)
	text = strings.Replace(text, "end = 2027-03-20\n", "end = 2027-03-20\nsegments = [\"platform\"]\n", 1)
	spec := filepath.Join(dir, "spec.toml")
	if err := os.WriteFile(spec, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "readout.json")
	code, _, stderr := runCmd(t, "analyze", "--spec", spec, "--json", out, "--out", filepath.Join(dir, "readout.md"))
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	raw, rs := readReadouts(t, out)
	validate(t, raw)
	twoCounts(t, rs)
	if !equalStrings(rs[0].Segmentation.Dimensions, []string{"platform"}) || len(rs[1].Segmentation.Dimensions) != 0 {
		t.Fatalf("segmentation: %+v, %+v", rs[0].Segmentation, rs[1].Segmentation)
	}
	want := map[string]map[string][2]int64{
		"ios":     {"classic": {1, 1}, "one-step": {2, 2}},
		"android": {"classic": {1, 0}, "one-step": {1, 0}},
	}
	segs := rs[0].Metrics[0].Segments
	if len(segs) != 2 {
		t.Fatalf("%d segment results, want 2: %+v", len(segs), segs)
	}
	for _, s := range segs {
		if s.Dimension != "platform" || s.Value == nil || !s.Exploratory {
			t.Errorf("segment %+v", s)
			continue
		}
		for _, a := range s.Arms {
			if w := want[*s.Value][a.Arm]; a.Units != w[0] || a.Conversions != w[1] {
				t.Errorf("platform %s, %s: %d units, %d conversions; want %d, %d", *s.Value, a.Arm, a.Units, a.Conversions, w[0], w[1])
			}
		}
	}
}

// TestSpecTableShapes runs a hand-made unit table and a hand-made counts
// table.
//
// units/units.csv, window [03-01, 03-20), booked within 7 days:
//
//	classic:  u1 (converted), u2 (not) -> 2 units, 1; u6 was exposed on
//	          02-20, before the window, and is left out
//	one-step: u3 (yes), u4 (no), u5 (true) -> 3 units, 2; u7 was exposed
//	          on 03-15, and 03-15 + 7 days = 03-22 is after the end: immature
//	by platform, one-step on ios: u3, u5 -> 2 units, 2 (u7 immature)
//
// counts/counts.csv gives the counts themselves: booked 200/20 and 210/30,
// signed_up 200/8 and 210/9. The sample ratio check of 200 against 210
// units under an equal split: expected 205 each, chi-square = 2 x 5^2 / 205
// = 0.243902 (hand calculation). booked is the primary metric, so it comes
// first although the file lists signed_up first.
func TestSpecTableShapes(t *testing.T) {
	type armCount struct {
		units, conversions, immature int64
	}
	cases := []struct {
		dir     string
		metrics []string
		want    map[string]map[string]armCount // metric -> arm -> counts
	}{
		{"units", []string{"booked"}, map[string]map[string]armCount{
			"booked": {"classic": {2, 1, 0}, "one-step": {3, 2, 1}},
		}},
		{"counts", []string{"booked", "signed_up"}, map[string]map[string]armCount{
			"booked":    {"classic": {200, 20, 0}, "one-step": {210, 30, 0}},
			"signed_up": {"classic": {200, 8, 0}, "one-step": {210, 9, 0}},
		}},
	}
	for _, tc := range cases {
		out := filepath.Join(t.TempDir(), "readout.json")
		spec := filepath.Join("testdata", "spec", tc.dir, "spec.toml")
		code, _, stderr := runCmd(t, "analyze", "--spec", spec, "--json", out, "--out", filepath.Join(t.TempDir(), "readout.md"))
		if code != exitOK {
			t.Fatalf("%s: exit %d: %s", tc.dir, code, stderr)
		}
		raw, rs := readReadouts(t, out)
		validate(t, raw)
		if len(rs) != 1 || len(rs[0].Metrics) != len(tc.metrics) {
			t.Fatalf("%s: %d readouts", tc.dir, len(rs))
		}
		r := rs[0]
		for i, m := range r.Metrics {
			if m.Name != tc.metrics[i] {
				t.Errorf("%s: metric %d is %s, want %s", tc.dir, i, m.Name, tc.metrics[i])
			}
			for _, a := range m.Arms {
				if w := tc.want[m.Name][a.Arm]; a.Units != w.units || a.Conversions != w.conversions || a.Immature != w.immature {
					t.Errorf("%s: %s/%s: %d units, %d conversions, %d immature; want %+v", tc.dir, m.Name, a.Arm, a.Units, a.Conversions, a.Immature, w)
				}
			}
		}
		switch tc.dir {
		case "units":
			found := false
			for _, s := range r.Metrics[0].Segments {
				if s.Value == nil || *s.Value != "ios" {
					continue
				}
				for _, a := range s.Arms {
					if a.Arm == "one-step" {
						found = a.Units == 2 && a.Conversions == 2
					}
				}
			}
			if !found {
				t.Errorf("units: platform ios, one-step: want 2 units, 2 conversions in %+v", r.Metrics[0].Segments)
			}
		case "counts":
			if sr := r.SampleRatio; !sr.Checked || math.Abs(sr.Statistic-50.0/205) > 1e-9 || sr.DF != 1 {
				t.Errorf("counts: sample ratio %+v, want chi-square 50/205 on 1 df", sr)
			}
		}
	}
}

// auditRow holds the audit table columns the test checks; the metric
// column is converted_booked or converted_showed_up.
type auditRow struct {
	Unit      string `parquet:"unit"`
	Arm       string `parquet:"arm"`
	Status    string `parquet:"status"`
	Booked    *int8  `parquet:"converted_booked,optional"`
	ShowedUp  *int8  `parquet:"converted_showed_up,optional"`
	converted int8
}

// TestSpecAudit writes the audit tables of the two-experiment log, one per
// experiment, and reads them back with parquet-go. By hand (see
// TestSpecTwoExperiments), units sorted:
//
//	booking-form: v1 classic 1, v2 classic 0, v3 one-step 1, v4 one-step 0,
//	              v5 one-step 1
//	reminder-sms: v1 sms 1, v2 none 0, v6 none 1, v7 sms 0
func TestSpecAudit(t *testing.T) {
	dir := t.TempDir()
	spec := filepath.Join("testdata", "spec", "two", "spec.toml")
	audit := filepath.Join(dir, "audit.parquet")
	code, _, stderr := runCmd(t, "analyze", "--spec", spec, "--audit", audit, "--out", filepath.Join(dir, "readout.md"))
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	want := map[string][]auditRow{
		"booking-form": {{Unit: "v1", Arm: "classic", converted: 1}, {Unit: "v2", Arm: "classic"},
			{Unit: "v3", Arm: "one-step", converted: 1}, {Unit: "v4", Arm: "one-step"}, {Unit: "v5", Arm: "one-step", converted: 1}},
		"reminder-sms": {{Unit: "v1", Arm: "sms", converted: 1}, {Unit: "v2", Arm: "none"},
			{Unit: "v6", Arm: "none", converted: 1}, {Unit: "v7", Arm: "sms"}},
	}
	for key, rows := range want {
		path := filepath.Join(dir, "audit-"+key+".parquet")
		got, err := parquet.ReadFile[auditRow](path)
		if err != nil {
			t.Fatalf("%s: %v", path, err)
		}
		if len(got) != len(rows) {
			t.Fatalf("%s: %d rows, want %d", path, len(got), len(rows))
		}
		for i, g := range got {
			c := g.Booked
			if key == "reminder-sms" {
				c = g.ShowedUp
			}
			w := rows[i]
			if g.Unit != w.Unit || g.Arm != w.Arm || g.Status != "analysed" || c == nil || *c != w.converted {
				t.Errorf("%s row %d: %+v (converted %v), want %+v", key, i, g, c, w)
			}
		}
	}
	// A counts table has no units to audit.
	code, _, stderr = runCmd(t, "analyze", "--spec", filepath.Join("testdata", "spec", "counts", "spec.toml"), "--audit", audit)
	if code != exitUsage || !strings.Contains(stderr, "a counts table has none") {
		t.Errorf("counts with --audit: exit %d, stderr %q", code, stderr)
	}
}
