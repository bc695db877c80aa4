package main

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"reflect"
	"strconv"
	"strings"
	"testing"

	"github.com/santhosh-tekuri/jsonschema/v6"

	"github.com/armtally/armtally/report"
	"github.com/armtally/armtally/sampledata"
)

// runCmd runs the command line and returns the exit code, stdout and
// stderr.
func runCmd(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errOut bytes.Buffer
	code := run(args, &out, &errOut)
	return code, out.String(), errOut.String()
}

// readDoc reads a JSON readout file.
func readDoc(t *testing.T, path string) (raw []byte, doc struct {
	Readouts []report.JSONReadout `json:"readouts"`
}) {
	t.Helper()
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(raw, &doc); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	if len(doc.Readouts) != 1 {
		t.Fatalf("%s: %d readouts, want 1", path, len(doc.Readouts))
	}
	return raw, doc
}

// gen writes a generated log and its truth into dir and returns the
// truth.
func gen(t *testing.T, dir string, args ...string) sampledata.Truth {
	t.Helper()
	truthPath := filepath.Join(dir, "truth.json")
	code, _, stderr := runCmd(t, append([]string{"gen", "--truth", truthPath}, args...)...)
	if code != exitOK {
		t.Fatalf("gen %v: exit %d: %s", args, code, stderr)
	}
	b, err := os.ReadFile(truthPath)
	if err != nil {
		t.Fatal(err)
	}
	var tr sampledata.Truth
	if err := json.Unmarshal(b, &tr); err != nil {
		t.Fatal(err)
	}
	return tr
}

// analyzeArgs returns the analyze flags that match a generated log: the
// window in which every unit is mature and the generator's metrics.
func analyzeArgs(tr sampledata.Truth) []string {
	args := []string{
		"--experiment", tr.Experiment, "--exposure-event", tr.ExposureEvent,
		"--control", tr.Arms[0].Name,
		"--start", tr.WindowStart.Format("2006-01-02T15:04:05Z07:00"),
		"--end", tr.WindowEnd.Format("2006-01-02T15:04:05Z07:00"),
	}
	for _, m := range tr.Metrics {
		args = append(args, "--metric", m.Name+"="+m.Name+":"+itoa(m.WindowSeconds)+"s")
	}
	return args
}

func itoa(n int64) string { return strconv.FormatInt(n, 10) }

// checkTruth checks that a readout's per-arm counts equal the generator's
// ground truth, which the generator counts while it places the events,
// without armtally's reader or tallier.
func checkTruth(t *testing.T, r report.JSONReadout, tr sampledata.Truth) {
	t.Helper()
	arms := map[string]sampledata.TruthArm{}
	for _, a := range tr.Arms {
		arms[a.Name] = a
	}
	if len(r.Arms) != len(tr.Arms) {
		t.Fatalf("readout has %d arms, truth %d", len(r.Arms), len(tr.Arms))
	}
	for mi, m := range r.Metrics {
		for _, a := range m.Arms {
			want := arms[a.Arm]
			if a.Units != want.SingleArmUnits || a.Conversions != want.Converted[mi] || a.Immature != 0 {
				t.Errorf("%s/%s: %d units, %d conversions, %d immature; truth %d units, %d conversions",
					m.Name, a.Arm, a.Units, a.Conversions, a.Immature, want.SingleArmUnits, want.Converted[mi])
			}
		}
	}
	if r.Diagnostics.MultiArmUnits != tr.MultiArmUnits || r.Diagnostics.UnitsExposed != tr.Units {
		t.Errorf("diagnostics: %d multi-arm of %d exposed; truth %d of %d",
			r.Diagnostics.MultiArmUnits, r.Diagnostics.UnitsExposed, tr.MultiArmUnits, tr.Units)
	}
	if r.Diagnostics.RowsRead != tr.Rows || r.Diagnostics.ExposureRows != tr.ExposureRows {
		t.Errorf("diagnostics: %d rows, %d exposure rows; truth %d, %d",
			r.Diagnostics.RowsRead, r.Diagnostics.ExposureRows, tr.Rows, tr.ExposureRows)
	}
}

// TestDemo runs the main job on the embedded demo and checks its counts
// against the generator's ground truth for the demo, and its JSON against
// the published schema.
func TestDemo(t *testing.T) {
	dir := t.TempDir()
	jsonPath := filepath.Join(dir, "demo.json")
	code, stdout, stderr := runCmd(t, "analyze", "--demo", "--json", jsonPath)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if !strings.HasPrefix(stdout, "# Experiment `checkout-flow-2026`") {
		t.Errorf("readout starts with %q", stdout[:min(80, len(stdout))])
	}
	raw, doc := readDoc(t, jsonPath)
	var buf bytes.Buffer
	sum, err := sampledata.WriteDemo(&buf)
	if err != nil {
		t.Fatal(err)
	}
	checkTruth(t, doc.Readouts[0], sampledata.NewTruth(sampledata.DemoConfig(), 0, sum))
	validate(t, raw)

	// Same input, byte-identical output.
	again := filepath.Join(dir, "again.json")
	code, stdout2, _ := runCmd(t, "analyze", "--demo", "--json", again)
	raw2, _ := readDoc(t, again)
	if code != exitOK || !bytes.Equal(raw, raw2) || stdout != stdout2 {
		t.Error("two runs on the same input differ")
	}
}

// validate checks a JSON readout against the published schema with a
// general-purpose JSON Schema validator.
func validate(t *testing.T, raw []byte) {
	t.Helper()
	schemaDoc, err := jsonschema.UnmarshalJSON(bytes.NewReader(report.Schema()))
	if err != nil {
		t.Fatal(err)
	}
	c := jsonschema.NewCompiler()
	c.AssertFormat()
	if err := c.AddResource(report.SchemaID, schemaDoc); err != nil {
		t.Fatal(err)
	}
	sch, err := c.Compile(report.SchemaID)
	if err != nil {
		t.Fatal(err)
	}
	v, err := jsonschema.UnmarshalJSON(bytes.NewReader(raw))
	if err != nil {
		t.Fatal(err)
	}
	if err := sch.Validate(v); err != nil {
		t.Errorf("readout does not validate against the schema: %v", err)
	}
}

// TestCSVAndParquetSameJSON writes one generated log as Parquet and as CSV
// (rows shuffled out of time order) and checks that both give
// byte-identical JSON and Markdown.
func TestCSVAndParquetSameJSON(t *testing.T) {
	dir := t.TempDir()
	pq, csv := filepath.Join(dir, "log.parquet"), filepath.Join(dir, "log.csv")
	tr := gen(t, dir, "--users", "20000", "--seed", "11", "--shuffle", "500", "--parquet", pq, "--csv", csv)
	var raws [][]byte
	var mds []string
	for _, in := range []string{pq, csv} {
		out := filepath.Join(dir, filepath.Base(in)+".json")
		md := filepath.Join(dir, filepath.Base(in)+".md")
		code, _, stderr := runCmd(t, append([]string{"analyze", in, "--json", out, "--out", md}, analyzeArgs(tr)...)...)
		if code != exitOK {
			t.Fatalf("analyze %s: exit %d: %s", in, code, stderr)
		}
		raw, doc := readDoc(t, out)
		checkTruth(t, doc.Readouts[0], tr)
		validate(t, raw)
		raws = append(raws, raw)
		b, err := os.ReadFile(md)
		if err != nil {
			t.Fatal(err)
		}
		mds = append(mds, string(b))
	}
	if !bytes.Equal(raws[0], raws[1]) {
		t.Error("Parquet and CSV give different JSON")
	}
	if mds[0] != mds[1] {
		t.Error("Parquet and CSV give different Markdown")
	}
}

// TestRecoversTrueEffects generates a large log with known effects (the
// demo's: one-page lifts purchase from 10% to 12%, nothing else changes)
// and checks that every true difference lies inside its 95% interval and
// that the arm without an effect is not declared significant. The seed is
// fixed, so the check is deterministic; with another seed each interval
// would miss its true value 5% of the time.
func TestRecoversTrueEffects(t *testing.T) {
	if testing.Short() {
		t.Skip("generates 200,000 units")
	}
	dir := t.TempDir()
	pq := filepath.Join(dir, "log.parquet")
	tr := gen(t, dir, "--users", "200000", "--seed", "2026", "--parquet", pq)
	out := filepath.Join(dir, "readout.json")
	code, _, stderr := runCmd(t, append([]string{"analyze", pq, "--json", out}, analyzeArgs(tr)...)...)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	_, doc := readDoc(t, out)
	r := doc.Readouts[0]
	checkTruth(t, r, tr)
	rates := map[string][]float64{}
	for _, a := range tr.Arms {
		rates[a.Name] = a.TrueRates
	}
	for mi, m := range r.Metrics {
		for _, c := range m.Comparisons {
			trueDiff := rates[c.Treatment][mi] - rates[c.Control][mi]
			iv := c.DifferenceInterval
			if iv == nil || trueDiff < iv.Lower || trueDiff > iv.Upper {
				t.Errorf("%s, %s vs %s: true difference %.4f outside the interval %+v", m.Name, c.Treatment, c.Control, trueDiff, iv)
			}
			if trueDiff == 0 && c.Treatment == "saved-basket" && c.Significant {
				t.Errorf("%s: saved-basket has no true effect but is significant (p = %g)", m.Name, c.Z.PValue)
			}
			if trueDiff != 0 && !c.Significant {
				t.Errorf("%s: %s has a true effect of %.3f but is not significant with 66,000 units per arm", m.Name, c.Treatment, trueDiff)
			}
		}
	}
}

// TestExitCodes checks the documented exit codes and that errors name
// what is wrong.
func TestExitCodes(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "bad.csv")
	err := os.WriteFile(bad, []byte("user_id,ts,event,experiment,arm\n"+
		"u1,2026-11-02T10:00:00Z,exposure,exp,control\n"+
		"u2,2026-11-02T10:00:00Z,exposure,exp,treat\n"+
		"u3,yesterday,exposure,exp,control\n"), 0o644)
	if err != nil {
		t.Fatal(err)
	}
	// 1,000 units in control, 1,200 in treat: chi-square = 18.2, p ~ 2e-5,
	// a sample ratio mismatch at 0.001 under an equal planned split.
	skewed := filepath.Join(dir, "skewed")
	if err := os.Mkdir(skewed, 0o755); err != nil {
		t.Fatal(err)
	}
	var b strings.Builder
	b.WriteString("user_id,ts,event,experiment,arm\n")
	for i := 0; i < 2200; i++ {
		arm := "control"
		if i >= 1000 {
			arm = "treat"
		}
		b.WriteString("u" + strconv.Itoa(i) + ",2026-11-02T10:00:00Z,exposure,exp," + arm + "\n")
	}
	if err := os.WriteFile(filepath.Join(skewed, "part-0.csv"), []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}

	cases := []struct {
		name   string
		args   []string
		code   int
		stderr string
	}{
		{"no command", nil, exitUsage, "Usage:"},
		{"unknown command", []string{"frobnicate"}, exitUsage, `unknown command "frobnicate"`},
		{"unknown flag", []string{"analyze", "--demo", "--colour"}, exitUsage, "unknown flag: --colour"},
		{"no metric", []string{"analyze", bad}, exitUsage, "name at least one metric"},
		{"bad metric", []string{"analyze", bad, "--metric", "buy=:7x"}, exitUsage, "--metric"},
		{"bad alpha", []string{"analyze", "--demo", "--alpha", "1.5"}, exitUsage, "--alpha"},
		{"split without arms", []string{"analyze", "--demo", "--arms", "", "--split", "1,1"}, exitUsage, "--split needs --arms"},
		{"missing file", []string{"analyze", filepath.Join(dir, "nope.csv"), "--metric", "buy"}, exitData, "nope.csv"},
		{"bad row", []string{"analyze", bad, "--metric", "buy"}, exitData, `bad.csv:4: column "ts": cannot parse "yesterday"`},
		{"unplanned arm", []string{"analyze", skewed, "--metric", "buy", "--arms", "control,other"}, exitData, `part-0.csv:1002: column "arm": exposure row with an arm that is not planned (value "treat")`},
		{"sample ratio ignored", []string{"analyze", skewed, "--metric", "buy", "--allow-absent-event", "buy"}, exitOK, ""},
		{"sample ratio fails", []string{"analyze", skewed, "--metric", "buy", "--allow-absent-event", "buy", "--fail-on-sample-ratio"}, exitSampleRatio, "sample ratio mismatch"},
		{"bad adjustment", []string{"analyze", "--demo", "--adjust", "sidak"}, exitUsage, "--adjust"},
		{"bad interval", []string{"analyze", "--demo", "--interval", "exact"}, exitUsage, "--interval"},
		{"alpha too large for one-sided", []string{"analyze", "--demo", "--alpha", "0.5"}, exitUsage, "--alpha"},
		{"bad margin", []string{"analyze", "--demo", "--guardrail", "x=y~3"}, exitUsage, "--guardrail"},
		{"lower-is-better unknown", []string{"analyze", "--demo", "--lower-is-better", "refunds"}, exitUsage, `"refunds"`},
		{"help", []string{"help", "analyze"}, exitOK, ""},
		{"gen without output", []string{"gen"}, exitUsage, "--parquet"},
	}
	for _, tc := range cases {
		code, _, stderr := runCmd(t, tc.args...)
		if code != tc.code || !strings.Contains(stderr, tc.stderr) {
			t.Errorf("%s: exit %d, stderr %q; want exit %d and %q", tc.name, code, stderr, tc.code, tc.stderr)
		}
	}
}

// TestHelpExamples checks that every example in the help texts parses.
func TestHelpExamples(t *testing.T) {
	for _, cmd := range []string{"analyze", "gen"} {
		code, help, _ := runCmd(t, cmd, "--help")
		if code != exitOK {
			t.Fatalf("%s --help: exit %d", cmd, code)
		}
		_, examples, _ := strings.Cut(help, "Examples:\n")
		examples, _, _ = strings.Cut(examples, "\n\n")
		n := 0
		for _, line := range strings.Split(examples, "\n") {
			fields := strings.Fields(line)
			if len(fields) < 2 || fields[0] != "armtally" || fields[1] != cmd {
				continue
			}
			n++
			switch cmd {
			case "analyze":
				_, err := parseAnalyze(fields[2:], &bytes.Buffer{}, &bytes.Buffer{})
				// The example files do not exist; every other check passes.
				if err != nil && !strings.Contains(err.Error(), "no such file") {
					t.Errorf("example %q: %v", line, err)
				}
			case "gen":
				if !strings.Contains(line, "--parquet") && !strings.Contains(line, "--csv") {
					t.Errorf("example %q writes nothing", line)
				}
			}
		}
		if n == 0 {
			t.Errorf("%s --help has no examples", cmd)
		}
	}
}

// TestSegmentFlag breaks the demo down by platform with --segment and
// checks that the segments partition each arm: units and conversions of
// the values add up to the arm's (common practice: every analysed unit has
// exactly one first-exposure platform in the demo).
func TestSegmentFlag(t *testing.T) {
	out := filepath.Join(t.TempDir(), "seg.json")
	code, _, stderr := runCmd(t, "analyze", "--demo", "--segment", "platform", "--json", out)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	_, doc := readDoc(t, out)
	for _, m := range doc.Readouts[0].Metrics {
		sums := map[string][2]int64{}
		values := map[string]bool{}
		for _, s := range m.Segments {
			if s.Dimension != "platform" || s.Value == nil || !s.Exploratory {
				t.Fatalf("%s: segment %+v", m.Name, s)
			}
			values[*s.Value] = true
			for _, a := range s.Arms {
				v := sums[a.Arm]
				sums[a.Arm] = [2]int64{v[0] + a.Units, v[1] + a.Conversions}
			}
		}
		if len(values) != 3 || !values["web"] || !values["ios"] || !values["android"] {
			t.Errorf("%s: segment values %v, want web, ios, android", m.Name, values)
		}
		for _, a := range m.Arms {
			if got := sums[a.Arm]; got != [2]int64{a.Units, a.Conversions} {
				t.Errorf("%s/%s: segments sum to %v, arm has %d units, %d conversions", m.Name, a.Arm, got, a.Units, a.Conversions)
			}
		}
	}
}

// TestUnknownArmBudget checks that, under an error budget, exposures in an
// arm that is not planned are skipped and counted: the skewed log of
// TestExitCodes has 1,000 control and 1,200 "treat" exposures, here with 10
// "other" exposures after them (counted by construction), and only control
// is planned besides "other".
func TestUnknownArmBudget(t *testing.T) {
	dir := t.TempDir()
	var b strings.Builder
	b.WriteString("user_id,ts,event,experiment,arm\n")
	for i := 0; i < 2210; i++ {
		arm := "control"
		if i >= 2200 {
			arm = "other"
		} else if i >= 1000 {
			arm = "treat"
		}
		b.WriteString("u" + strconv.Itoa(i) + ",2026-11-02T10:00:00Z,exposure,exp," + arm + "\n")
	}
	in := filepath.Join(dir, "log.csv")
	if err := os.WriteFile(in, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "r.json")
	code, _, stderr := runCmd(t, "analyze", in, "--metric", "buy", "--allow-absent-event", "buy", "--arms", "control,other", "--max-bad-rows", "-1", "--json", out)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	_, doc := readDoc(t, out)
	d := doc.Readouts[0].Diagnostics
	want := []report.JSONReasonCount{{Reason: "unknown_arm", Count: 1200}}
	if !reflect.DeepEqual(d.BadRows, want) || d.RowsRead != 2210 || d.UnitsExposed != 1010 {
		t.Errorf("bad rows %+v, rows read %d, units exposed %d; want %+v, 2210, 1010", d.BadRows, d.RowsRead, d.UnitsExposed, want)
	}
}
