package main

import (
	"bytes"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/armtally/armtally/sampledata"
)

// analyze --state over a folder that grows by a day's file: the second
// run reads only the new file and writes the JSON readout a run without
// the state writes; a removed file makes it read every file again and say
// why on stderr and in the readout.
func TestAnalyzeState(t *testing.T) {
	cfg := sampledata.DemoConfig()
	cfg.Users, cfg.NeverExposedUsers = 400, 20
	var buf bytes.Buffer
	if _, err := sampledata.WriteCSV(&buf, cfg, rand.NewPCG(3, 4)); err != nil {
		t.Fatal(err)
	}
	lines := strings.SplitAfter(buf.String(), "\n")
	header, rows := lines[0], lines[1:]
	// Two files, split at a time: rows before 2026-11-10, and the rest.
	var early, late strings.Builder
	early.WriteString(header)
	late.WriteString(header)
	for _, l := range rows {
		if _, ts, ok := strings.Cut(l, ","); ok && ts < "2026-11-10" {
			early.WriteString(l)
		} else if l != "" {
			late.WriteString(l)
		}
	}
	dir, out := t.TempDir(), t.TempDir()
	write := func(name, data string) {
		if err := os.MkdirAll(filepath.Join(dir, filepath.Dir(name)), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, name), []byte(data), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	state := filepath.Join(out, "tally.state")
	analyze := func(json string, withState bool) (int, string) {
		args := []string{"analyze", dir, "--experiment", "checkout-flow-2026", "--metric", "purchase=purchase:7d",
			"--end", "2026-11-23", "--json", filepath.Join(out, json), "--out", filepath.Join(out, "r.md")}
		if withState {
			args = append(args, "--state", state)
		}
		code, _, stderr := runCmd(t, args...)
		return code, stderr
	}
	write("dt=1/part-0.csv", early.String())
	if code, stderr := analyze("a.json", true); code != 0 {
		t.Fatalf("first run: exit %d: %s", code, stderr)
	}
	write("dt=2/part-0.csv", late.String())
	if code, stderr := analyze("b.json", true); code != 0 || stderr != "" {
		t.Fatalf("second run: exit %d: %s", code, stderr)
	}
	if code, stderr := analyze("full.json", false); code != 0 {
		t.Fatalf("full run: exit %d: %s", code, stderr)
	}
	inc, _ := readDoc(t, filepath.Join(out, "b.json"))
	full, _ := readDoc(t, filepath.Join(out, "full.json"))
	if !bytes.Equal(inc, full) {
		t.Fatal("the incremental JSON readout differs from the full run's")
	}
	if err := os.RemoveAll(filepath.Join(dir, "dt=1")); err != nil {
		t.Fatal(err)
	}
	code, stderr := analyze("c.json", true)
	if code != 0 || !strings.Contains(stderr, "read every file again: file "+filepath.Join(dir, "dt=1", "part-0.csv")+" was read before and is gone") {
		t.Fatalf("after a removal: exit %d, stderr %q", code, stderr)
	}
	if raw, _ := readDoc(t, filepath.Join(out, "c.json")); !bytes.Contains(raw, []byte("every file was read again instead of only the new ones")) {
		t.Fatal("the readout does not say that every file was read again")
	}
}
