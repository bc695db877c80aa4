package main

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// spillLog writes a CSV event log of n units for the --memory-limit tests:
// exposures over ten days in three arms (one unit in 25 exposed to two),
// purchases for one unit in three up to 29 hours after exposure, and page
// views, of which the last, at 276 hours (after every other row: the last
// purchase is at 269), sets the data's freshness. With no window end, that
// freshness is the maturity horizon: with a 2-day window, the units exposed
// after 228 hours are immature.
func spillLog(t *testing.T, dir string, n int) string {
	t.Helper()
	base := time.Date(2026, 9, 1, 0, 0, 0, 0, time.UTC)
	arms := []string{"control", "blue", "green"}
	var b strings.Builder
	b.WriteString("user_id,ts,event,experiment,arm\n")
	at := func(h int) string { return base.Add(time.Duration(h) * time.Hour).Format(time.RFC3339) }
	for u := 0; u < n; u++ {
		h := (u * 7919) % 240 // exposure hour in [0, 240)
		user := fmt.Sprintf("unit-%05d", u)
		fmt.Fprintf(&b, "%s,%s,exposure,exp,%s\n", user, at(h), arms[u%3])
		if u%25 == 0 {
			fmt.Fprintf(&b, "%s,%s,exposure,exp,%s\n", user, at(h+1), arms[(u+1)%3])
		}
		if u%3 == 0 {
			fmt.Fprintf(&b, "%s,%s,purchase,,\n", user, at(h+(u%30)))
		}
		fmt.Fprintf(&b, "%s,%s,page_view,,\n", user, at(h+2))
	}
	fmt.Fprintf(&b, "unit-00000,%s,page_view,,\n", at(276))
	path := filepath.Join(dir, "log.csv")
	if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// --memory-limit spills the rows to disk in hash partitions of the units,
// tallies them a group at a time and merges the tallies: the readout must
// be byte for byte the one made in memory, for limits that make one group,
// a few, or one partition per group. Maturity is judged against the
// freshness set by a filtered row, so a group that did not share the whole
// input's freshness would count the wrong units as immature.
func TestMemoryLimitSameReadout(t *testing.T) {
	dir := t.TempDir()
	in := spillLog(t, dir, 3000)
	args := []string{"analyze", in, "--experiment", "exp", "--control", "control",
		"--metric", "purchase=purchase:2d", "--multi-arm", "exclude", "--maturity", "exclude"}
	wantJSON := filepath.Join(dir, "mem.json")
	wantMD := filepath.Join(dir, "mem.md")
	if code, _, stderr := runCmd(t, append(args, "--json", wantJSON, "--out", wantMD)...); code != exitOK {
		t.Fatalf("in memory: exit %d: %s", code, stderr)
	}
	raw, doc := readDoc(t, wantJSON)
	d := doc.Readouts[0].Diagnostics
	if len(d.Immature) == 0 || d.Immature[0].Units == 0 || d.MultiArmUnits == 0 {
		t.Fatalf("the log does not exercise maturity and the multi-arm rule: %+v", d)
	}
	wantMDBytes, err := os.ReadFile(wantMD)
	if err != nil {
		t.Fatal(err)
	}
	for _, limit := range []string{"1GB", "40kB", "1B"} {
		gotJSON := filepath.Join(dir, "spill-"+limit+".json")
		gotMD := filepath.Join(dir, "spill-"+limit+".md")
		spillDir := t.TempDir()
		code, _, stderr := runCmd(t, append(args, "--memory-limit", limit, "--spill-dir", spillDir, "--json", gotJSON, "--out", gotMD)...)
		if code != exitOK {
			t.Fatalf("--memory-limit %s: exit %d: %s", limit, code, stderr)
		}
		got, _ := readDoc(t, gotJSON)
		if !bytes.Equal(got, raw) {
			t.Errorf("--memory-limit %s: the JSON readout differs from the one made in memory", limit)
		}
		md, err := os.ReadFile(gotMD)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(md, wantMDBytes) {
			t.Errorf("--memory-limit %s: the Markdown readout differs from the one made in memory", limit)
		}
		if left, _ := os.ReadDir(spillDir); len(left) != 0 {
			t.Errorf("--memory-limit %s: %d entries left in the spill folder", limit, len(left))
		}
	}
}

func TestMemoryLimitUsage(t *testing.T) {
	dir := t.TempDir()
	in := spillLog(t, dir, 30)
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"--memory-limit", "lots"}, "--memory-limit"},
		{[]string{"--memory-limit", "0"}, "--memory-limit"},
		{[]string{"--memory-limit", "1GB", "--audit", filepath.Join(dir, "a.parquet")}, "--audit"},
	} {
		args := append([]string{"analyze", in, "--experiment", "exp", "--metric", "purchase"}, c.args...)
		code, _, stderr := runCmd(t, args...)
		if code != exitUsage || !strings.Contains(stderr, c.want) {
			t.Errorf("%v: exit %d, stderr %q; want %d naming %s", c.args, code, stderr, exitUsage, c.want)
		}
	}
}
