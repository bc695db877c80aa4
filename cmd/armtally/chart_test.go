package main

import (
	"bytes"
	"image/png"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

const chartLine = "Chart of each treatment's difference from the control with its interval, per metric: "

// --chart writes the chart with the readouts, and the Markdown links it
// relative to its own folder; PNG for a .png name.
func TestChartFlag(t *testing.T) {
	dir := t.TempDir()
	for _, d := range []string{"charts", "md"} {
		if err := os.Mkdir(filepath.Join(dir, d), 0o755); err != nil {
			t.Fatal(err)
		}
	}
	md := filepath.Join(dir, "md", "readout.md")
	svg := filepath.Join(dir, "charts", "c.svg")
	code, _, stderr := runCmd(t, "analyze", "--demo", "--chart", svg, "--out", md)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if got := fileContent(t, svg); !strings.HasPrefix(got, "<?xml") || !strings.Contains(got, "<svg") || !strings.Contains(got, ">Experiment checkout-flow-2026</text>") {
		t.Errorf("%s is not the demo's SVG chart: %.200q", svg, got)
	}
	if got := fileContent(t, md); !strings.Contains(got, chartLine+"[c.svg](../charts/c.svg)\n") {
		t.Errorf("the Markdown does not link ../charts/c.svg:\n%s", got)
	}

	pngPath := filepath.Join(dir, "c.png")
	code, _, stderr = runCmd(t, "analyze", "--demo", "--chart", pngPath, "--out", md)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if _, err := png.Decode(bytes.NewReader([]byte(fileContent(t, pngPath)))); err != nil {
		t.Errorf("%s: %v", pngPath, err)
	}
	if got := fileContent(t, md); !strings.Contains(got, "(../c.png)") {
		t.Errorf("the Markdown does not link ../c.png")
	}

	// The Markdown on standard output links the path as given; without
	// --chart there is no link.
	code, stdout, stderr := runCmd(t, "analyze", "--demo", "--chart", svg)
	if code != exitOK || !strings.Contains(stdout, "]("+filepath.ToSlash(svg)+")") {
		t.Errorf("exit %d (%s); stdout does not link %s", code, stderr, svg)
	}
	code, stdout, _ = runCmd(t, "analyze", "--demo")
	if code != exitOK || strings.Contains(stdout, "Chart of") {
		t.Errorf("exit %d; a chart is linked without --chart", code)
	}
}

// With several experiments, each gets its file, named as --audit names
// them, and its readout links it.
func TestChartTwoExperiments(t *testing.T) {
	dir := t.TempDir()
	md := filepath.Join(dir, "readout.md")
	spec := filepath.Join("testdata", "spec", "two", "spec.toml")
	code, _, stderr := runCmd(t, "analyze", "--spec", spec, "--chart", filepath.Join(dir, "c.svg"), "--out", md)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	readout := fileContent(t, md)
	for _, key := range []string{"booking-form", "reminder-sms"} {
		name := "c-" + key + ".svg"
		if got := fileContent(t, filepath.Join(dir, name)); !strings.Contains(got, ">Experiment "+key+"</text>") {
			t.Errorf("%s is not %s's chart: %.200q", name, key, got)
		}
		if !strings.Contains(readout, chartLine+"["+name+"]("+name+")\n") {
			t.Errorf("the Markdown does not link %s", name)
		}
	}
	if got := fileContent(t, filepath.Join(dir, "c.svg")); got != "<none>" {
		t.Errorf("c.svg was written too")
	}
}

// A chart path that cannot be written is refused with the other outputs,
// before the input is read (bad.csv would be exit 3), and nothing is
// replaced.
func TestChartPathRefused(t *testing.T) {
	dir := t.TempDir()
	bad := writeTestFile(t, dir, "bad.csv", "user_id,ts,event,experiment,arm\nu1,not a time,exposure,exp,control\n")
	old := writeTestFile(t, dir, "old.md", "old\n")
	tests := []struct {
		name string
		args []string
		want string
	}{
		{"--chart -", []string{"--chart", "-"}, "--chart -"},
		{"--chart is the input", []string{"--chart", bad}, "--chart " + bad + " is an input"},
		{"--chart and --out the same file", []string{"--chart", old, "--out", old}, "are the same file"},
		{"--chart in a missing folder", []string{"--chart", filepath.Join(dir, "missing", "c.svg"), "--out", old}, "--chart " + filepath.Join(dir, "missing", "c.svg") + ": the folder to write it in does not exist"},
		{"--chart a folder", []string{"--chart", dir, "--out", old}, "is a folder"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			args := append([]string{"analyze", bad, "--experiment", "exp", "--metric", "purchase"}, tc.args...)
			code, stdout, stderr := runCmd(t, args...)
			if code != exitUsage || !strings.Contains(stderr, tc.want) {
				t.Errorf("exit %d, stderr %q; want %d and %q", code, stderr, exitUsage, tc.want)
			}
			if stdout != "" || fileContent(t, old) != "old\n" {
				t.Errorf("an output was written")
			}
		})
	}
}
