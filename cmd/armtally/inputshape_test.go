package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestInputShapeFlags reads the unit and counts tables of testdata/spec
// with flags alone (no spec file) and checks the counts worked out by hand
// in TestSpecTableShapes: units.csv gives booked 2 units / 1 conversion
// (classic) and 3 / 2 with 1 immature (one-step); counts.csv gives booked
// 200/20 and 210/30 and signed_up 200/8 and 210/9.
func TestInputShapeFlags(t *testing.T) {
	type armCount struct{ units, conversions, immature int64 }
	dir := filepath.Join("testdata", "spec")
	cases := []struct {
		name string
		args []string
		want map[string]map[string]armCount // metric -> arm -> counts
	}{
		{"units", []string{filepath.Join(dir, "units", "units.csv"), "--input-shape", "units", "--user-col", "unit", "--arm-col", "variant",
			"--ts-col", "exposed_at", "--segment", "platform", "--experiment", "booking-form", "--control", "classic", "--arms", "classic,one-step",
			"--start", "2027-03-01", "--end", "2027-03-20", "--metric", "booked=booked_flag:7d"},
			map[string]map[string]armCount{"booked": {"classic": {2, 1, 0}, "one-step": {3, 2, 1}}}},
		{"counts", []string{filepath.Join(dir, "counts", "counts.csv"), "--input-shape", "counts", "--arm-col", "variant",
			"--metric-col", "metric_name", "--units-col", "n_units", "--conversions-col", "n_conv", "--experiment", "booking-form",
			"--control", "classic", "--arms", "classic,one-step", "--metric", "booked", "--metric", "signed_up"},
			map[string]map[string]armCount{
				"booked":    {"classic": {200, 20, 0}, "one-step": {210, 30, 0}},
				"signed_up": {"classic": {200, 8, 0}, "one-step": {210, 9, 0}},
			}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			out := filepath.Join(t.TempDir(), "readout.json")
			code, _, stderr := runCmd(t, append([]string{"analyze", "--json", out, "--out", filepath.Join(t.TempDir(), "readout.md")}, tc.args...)...)
			if code != exitOK {
				t.Fatalf("exit %d: %s", code, stderr)
			}
			raw, rs := readReadouts(t, out)
			validate(t, raw)
			if len(rs) != 1 || len(rs[0].Metrics) != len(tc.want) {
				t.Fatalf("%d readouts, want 1 with %d metrics", len(rs), len(tc.want))
			}
			for _, m := range rs[0].Metrics {
				for _, a := range m.Arms {
					if w, ok := tc.want[m.Name][a.Arm]; !ok || a.Units != w.units || a.Conversions != w.conversions || a.Immature != w.immature {
						t.Errorf("%s/%s: %d units, %d conversions, %d immature; want %+v", m.Name, a.Arm, a.Units, a.Conversions, a.Immature, w)
					}
				}
			}
		})
	}
}

// TestInputShapeHints checks that a file read as another input shape than
// it looks like stops the run (exit 3) with the missing column and a hint
// naming the shape it looks like and the flag to use, and that a file
// that looks like nothing else gets no hint.
func TestInputShapeHints(t *testing.T) {
	dir := filepath.Join("testdata", "spec")
	plain := filepath.Join(t.TempDir(), "counts.csv")
	if err := os.WriteFile(plain, []byte("arm,metric,units,conversions\ncontrol,buy,100,10\nfast,buy,100,12\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		name string
		args []string
		want []string // in stderr; nil: no hint
	}{
		{"counts read as an event log", []string{plain, "--metric", "buy"},
			[]string{`column "user_id": missing column`, `hint: ` + plain + ` looks like a counts table (it has the columns "units" and "conversions")`, "--input-shape counts"}},
		{"counts with other names", []string{filepath.Join(dir, "counts", "counts.csv"), "--metric", "booked"},
			[]string{`looks like a counts table (it has the columns "n_units" and "n_conv")`, "--units-col", "--conversions-col"}},
		{"unit table read as an event log", []string{filepath.Join(dir, "units", "units.csv"), "--metric", "booked"},
			[]string{`looks like a unit table (it has no event column, and "booked_flag" holds only 0/1 values)`, "--input-shape units", "--metric NAME=COLUMN"}},
		{"event log read as a unit table", []string{filepath.Join(dir, "two", "events.csv"), "--input-shape", "units", "--metric", "booked"},
			[]string{`looks like an event log (it has the column "event_name")`, "--input-shape events"}},
		{"event log read as the spec's counts table", []string{"--spec", filepath.Join(dir, "counts", "spec.toml"), filepath.Join(dir, "two", "events.csv")},
			[]string{`column "metric_name": missing column`, "looks like an event log"}},
		{"an event log with other column names", []string{filepath.Join(dir, "two", "events.csv"), "--metric", "b=booking_confirmed"}, nil},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			code, _, stderr := runCmd(t, append([]string{"analyze", "--out", filepath.Join(t.TempDir(), "r.md")}, tc.args...)...)
			if code != exitData {
				t.Errorf("exit %d, want %d: %s", code, exitData, stderr)
			}
			if tc.want == nil && strings.Contains(stderr, "hint:") {
				t.Errorf("a hint for a file that looks like nothing else: %s", stderr)
			}
			for _, w := range tc.want {
				if !strings.Contains(stderr, w) {
					t.Errorf("stderr lacks %q:\n%s", w, stderr)
				}
			}
		})
	}
}

// TestInputShapeUsage checks the usage errors of the input-shape flags.
func TestInputShapeUsage(t *testing.T) {
	dir := filepath.Join("testdata", "spec")
	counts := filepath.Join(dir, "counts", "counts.csv")
	cases := []struct {
		name string
		args []string
		want string
	}{
		{"unknown shape", []string{counts, "--input-shape", "rows", "--metric", "b"}, `--input-shape "rows": want events, units or counts`},
		{"counts column of an event log", []string{counts, "--units-col", "n", "--metric", "b"}, `--units-col is for a counts table (--input-shape counts); the input shape is "events"`},
		{"counts metric with a column", []string{counts, "--input-shape", "counts", "--metric", "booked=n_conv"}, `--metric "booked=n_conv": a counts table names each metric in its metric column`},
		{"unit metric with two columns", []string{counts, "--input-shape", "units", "--metric", "booked=a,b"}, `--metric "booked=a,b": a unit table has one 0/1 column per metric`},
		{"unit guardrail with two columns", []string{counts, "--input-shape", "units", "--metric", "x", "--guardrail", "g=a,b~1pp"}, `--guardrail "g=a,b~1pp": a unit table has one 0/1 column per metric`},
		{"demo as a table", []string{"--demo", "--input-shape", "units"}, "the demo is an event log, not a unit table"},
		{"table delimiter", []string{counts, "--input-shape", "counts", "--delimiter", ";", "--metric", "b"}, `not supported yet with a counts table (input shape "counts"): --delimiter`},
		{"table bad-row budget", []string{counts, "--input-shape", "units", "--max-bad-rows", "3", "--metric", "b"}, "--max-bad-rows and --max-bad-share"},
		{"counts audit", []string{counts, "--input-shape", "counts", "--audit", filepath.Join(t.TempDir(), "a.parquet"), "--metric", "b"}, "a counts table has none"},
		// The spec's metrics list events; --input-shape units makes them
		// wrong, and the message names the file, line and key.
		{"spec metrics against the flag's shape", []string{"--spec", filepath.Join(dir, "two", "spec.toml"), "--input-shape", "units"},
			filepath.Join(dir, "two", "spec.toml") + `:22: experiment[0].metric[0].name: metric "booked" lists events (booking_confirmed), which only an event log has; the input is a unit table (input shape "units", from --input-shape)`},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			code, _, stderr := runCmd(t, append([]string{"analyze"}, tc.args...)...)
			if code != exitUsage || !strings.Contains(stderr, tc.want) {
				t.Errorf("exit %d, stderr %q; want exit %d and %q", code, stderr, exitUsage, tc.want)
			}
		})
	}
}
