package main

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// monitorSpec writes a spec file for the generated log of nightArgs with
// the given [output] and [[experiment]] lines added, and returns its path.
func monitorSpec(t *testing.T, dir, name, output, exp, purchaseSeq, signupSeq string) string {
	t.Helper()
	text := "[output]\n" + output + `
[[experiment]]
key = "checkout-flow-2026"
control = "control"
start = 2026-11-02
maturity = "include"
` + exp + `
[[experiment.metric]]
name = "purchase"
events = ["purchase"]
window = "7d"
` + purchaseSeq + `
[[experiment.metric]]
name = "signup"
events = ["newsletter_signup"]
window = "3d"
role = "secondary"
` + signupSeq + "\n"
	path := filepath.Join(dir, name)
	if err := os.WriteFile(path, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// asOfNight is the --as-of instant of night k of nightArgs.
func asOfNight(k int) string {
	return time.Date(2026, 11, 2+k, 0, 0, 0, 0, time.UTC).Format(time.RFC3339)
}

// TestSpecMonitoringKeys runs three nights of a generated log twice, once
// with the monitoring flags and once with the same settings as spec-file
// keys (experiment.metric.sequential, experiment.planned_units,
// experiment.mixing_variance, output.history, output.looks_chart): the
// readouts, the stored looks and the charts over the looks must be the
// same. The file's mixing variance (4e-4, not the default) must reach
// the mixture test: its always-valid p-value is checked against the
// formula of Johari et al. (mixtureP), and the file's planned units
// against the information fraction min(n)/3000 computed from the counts.
func TestSpecMonitoringKeys(t *testing.T) {
	dir := t.TempDir()
	log := filepath.Join(dir, "ev.parquet")
	gen(t, dir, "--users", "6000", "--days", "10", "--seed", "5", "--arm", "control=1:0.10,0.04", "--arm", "fast=1:0.12,0.05", "--parquet", log)
	const tau2, planned = 4e-4, 3000
	histF, histS := filepath.Join(dir, "flags.db"), filepath.Join(dir, "spec.db")
	chartF, chartS := filepath.Join(dir, "flags.svg"), filepath.Join(dir, "spec.svg")
	spec := monitorSpec(t, dir, "spec.toml",
		"markdown = \"spec.md\"\njson = \"spec.json\"\nhistory = \"spec.db\"\nlooks_chart = \"spec.svg\"\n",
		fmt.Sprintf("planned_units = %d\nmixing_variance = %v\n", planned, tau2),
		`sequential = "obf"`, `sequential = "mixture"`)
	var counts [][4]int64
	for k := 1; k <= 3; k++ {
		jsonF, jsonS := filepath.Join(dir, "flags.json"), filepath.Join(dir, "spec.json")
		args := nightArgs(log, histF, k, "--secondary-metric", "signup=newsletter_signup:3d",
			"--sequential", "purchase=obf", "--sequential", "signup=mixture", "--planned-units", fmt.Sprint(planned),
			"--mixing-variance", fmt.Sprint(tau2), "--looks-chart", chartF, "--json", jsonF, "-o", filepath.Join(dir, "flags.md"))
		if code, _, stderr := runCmd(t, args...); code != exitOK {
			t.Fatalf("night %d with flags: exit %d: %s", k, code, stderr)
		}
		if code, _, stderr := runCmd(t, "analyze", "--spec", spec, log, "--as-of", asOfNight(k)); code != exitOK {
			t.Fatalf("night %d with the spec file: exit %d: %s", k, code, stderr)
		}
		rawF, docF := readDoc(t, jsonF)
		rawS, docS := readDoc(t, jsonS)
		validate(t, rawS)
		if f, s := mustJSON(t, docF.Readouts), mustJSON(t, docS.Readouts); f != s {
			t.Errorf("night %d: the readouts differ\nflags: %s\nspec:  %s", k, rawF, rawS)
		}
		r := docS.Readouts[0]
		if r.Monitoring == nil || len(r.Monitoring.Comparisons) != 2 || r.Monitoring.Look != k {
			t.Fatalf("night %d: monitoring %+v, want look %d with two comparisons", k, r.Monitoring, k)
		}
		var purchase, signup [4]int64
		for i, m := range r.Metrics {
			a := m.Arms
			c := [4]int64{a[1].Conversions, a[1].Units, a[0].Conversions, a[0].Units}
			if i == 0 {
				purchase = c
			} else {
				signup = c
			}
		}
		counts = append(counts, signup)
		for _, c := range r.Monitoring.Comparisons {
			switch c.Metric {
			case "purchase":
				f := float64(min(purchase[1], purchase[3])) / planned
				if c.InformationFraction == nil || math.Abs(*c.InformationFraction-f) > 1e-15 {
					t.Errorf("night %d: purchase information fraction %v, want %v (planned_units %d)", k, c.InformationFraction, f, planned)
				}
			case "signup":
				p := mixtureP(tau2, counts)
				if c.AlwaysValidP == nil || math.Abs(*c.AlwaysValidP-p) > 1e-12 {
					t.Errorf("night %d: signup always-valid p %v, want %v (mixing_variance %v)", k, c.AlwaysValidP, p, tau2)
				}
			default:
				t.Errorf("night %d: comparison of metric %q", k, c.Metric)
			}
		}
	}
	if f, s := looksText(t, histF), looksText(t, histS); f != s || !strings.Contains(s, "signup") {
		t.Errorf("the histories differ\nflags: %s\nspec:  %s", f, s)
	}
	if f, s := fileContent(t, chartF), fileContent(t, chartS); f != s || !strings.HasPrefix(s, "<?xml") {
		t.Error("the charts over the looks differ")
	}
	if !strings.Contains(fileContent(t, filepath.Join(dir, "spec.md")), "](spec.svg)") {
		t.Error("the spec run's Markdown does not link spec.svg")
	}

	// Flags override the file: any --sequential replaces the file's
	// methods, --planned-units its planned units, --history its history.
	out := filepath.Join(dir, "over.json")
	code, _, stderr := runCmd(t, "analyze", "--spec", spec, log, "--as-of", asOfNight(3), "--sequential", "purchase=pocock",
		"--planned-units", "6000", "--history", filepath.Join(dir, "over.db"), "--looks-chart", filepath.Join(dir, "over.svg"), "--json", out)
	if code != exitOK {
		t.Fatalf("overriding flags: exit %d: %s", code, stderr)
	}
	_, doc := readDoc(t, out)
	m := doc.Readouts[0].Monitoring
	if m == nil || len(m.Comparisons) != 1 || m.Comparisons[0].Metric != "purchase" || m.Look != 1 {
		t.Fatalf("overriding flags: monitoring %+v, want look 1 of a new history with purchase only", m)
	}
	purchase := doc.Readouts[0].Metrics[0].Arms
	if f, want := m.Comparisons[0].InformationFraction, float64(min(purchase[0].Units, purchase[1].Units))/6000; f == nil || math.Abs(*f-want) > 1e-15 {
		t.Errorf("overriding flags: information fraction %v, want %v (--planned-units 6000)", f, want)
	}
	if looks := storedLooks(t, histS); len(looks) != 3 {
		t.Errorf("the file's history holds %d looks after a run with --history elsewhere, want 3", len(looks))
	}
}

// mustJSON is v as JSON.
func mustJSON(t *testing.T, v any) string {
	t.Helper()
	b, err := json.Marshal(v)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

// looksText is the looks of the history file as text, without the time
// each was written (NaN fields print alike).
func looksText(t *testing.T, hist string) string {
	t.Helper()
	looks := storedLooks(t, hist)
	for i := range looks {
		looks[i].WrittenAt = time.Time{}
	}
	return fmt.Sprintf("%+v", looks)
}

// TestSpecMonitoringExits checks output.exit_on_boundary and
// output.max_staleness through the command, and their flags over them,
// on the log of TestNightRerunReplaces (10% against 60%: crossed by
// night 3 far beyond any boundary), and that a group-sequential method
// from the file without planned units names the file, line and key.
func TestSpecMonitoringExits(t *testing.T) {
	dir := t.TempDir()
	log := filepath.Join(dir, "ev.parquet")
	gen(t, dir, "--users", "6000", "--days", "10", "--arm", "control=1:0.10,0.04", "--arm", "fast=1:0.60,0.04", "--parquet", log)
	spec := monitorSpec(t, dir, "spec.toml",
		"markdown = \"n.md\"\nhistory = \"h.db\"\nexit_on_boundary = true\nmax_staleness = \"1s\"\n",
		"planned_units = 3000\n", `sequential = "obf"`, "")
	for _, c := range []struct {
		flags []string
		want  int
	}{
		// Night 3's newest row is less than a minute before the as-of
		// instant and more than a second (see TestNightRerunReplaces).
		{nil, exitStale},
		{[]string{"--max-staleness", "1h"}, exitBoundary},
		{[]string{"--max-staleness", "1h", "--exit-on-boundary=false"}, exitOK},
	} {
		args := append([]string{"analyze", "--spec", spec, log, "--as-of", asOfNight(3)}, c.flags...)
		if code, _, stderr := runCmd(t, args...); code != c.want {
			t.Errorf("%v: exit %d (%s), want %d", c.flags, code, stderr, c.want)
		}
	}
	noPlan := monitorSpec(t, dir, "noplan.toml", "", "", `sequential = "pocock"`, "")
	code, _, stderr := runCmd(t, "analyze", "--spec", noPlan, log, "--as-of", asOfNight(3))
	want := "noplan.toml:13: experiment[0].metric[0].sequential: \"pocock\" needs the planned units per arm"
	if code != exitUsage || !strings.Contains(stderr, want) {
		t.Errorf("pocock without planned units: exit %d, %s; want %d and %q", code, stderr, exitUsage, want)
	}
	if code, _, stderr := runCmd(t, "analyze", "--spec", noPlan, log, "--as-of", asOfNight(3), "--planned-units", "3000", "-o", filepath.Join(dir, "p.md")); code != exitOK {
		t.Errorf("pocock with --planned-units: exit %d: %s", code, stderr)
	}
}
