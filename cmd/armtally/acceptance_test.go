package main

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/armtally/armtally/report"
	"github.com/armtally/armtally/sampledata"
)

// TestSpecDrivesPartitionedMixedLog is the whole input path at once: a spec
// file with two experiments, two metrics each and two segment dimensions
// (one of them a partition folder) drives one run over a Hive-style
// partitioned folder that mixes Parquet and CSV. Each experiment's per-arm
// counts must equal its generator's ground truth, counted while the
// generator placed the events, without armtally's reader or tallier.
func TestSpecDrivesPartitionedMixedLog(t *testing.T) {
	dir := t.TempDir()
	logDir := filepath.Join(dir, "log")

	// Experiment A, written as Parquet in dt=2026-11-02.
	a := sampledata.DemoConfig()
	a.Users, a.NeverExposedUsers, a.ExposureDays = 3000, 50, 7
	a.Start = time.Date(2026, 11, 2, 0, 0, 0, 0, time.UTC)
	var pq bytes.Buffer
	sumA, err := sampledata.WriteParquet(&pq, a, rand.NewPCG(1, 2))
	if err != nil {
		t.Fatal(err)
	}
	writeFile(t, filepath.Join(logDir, "dt=2026-11-02", "part-0.parquet"), pq.Bytes())

	// Experiment B, a two-arm test of another key, written as CSV in
	// dt=2026-11-09, its user ids prefixed so that the two populations
	// are disjoint (the generator numbers users from 1 in every log).
	b := sampledata.DemoConfig()
	b.Experiment = "gift-wrap-2026"
	b.Users, b.NeverExposedUsers, b.ExposureDays = 2500, 40, 5
	b.Start = time.Date(2026, 11, 9, 0, 0, 0, 0, time.UTC)
	b.Arms = []sampledata.ArmConfig{
		{Name: "control", Share: 1, Rates: []float64{0.10, 0.04}},
		{Name: "gift-wrap", Share: 1, Rates: []float64{0.13, 0.04}},
	}
	var raw bytes.Buffer
	sumB, err := sampledata.WriteCSV(&raw, b, rand.NewPCG(3, 4))
	if err != nil {
		t.Fatal(err)
	}
	writeFile(t, filepath.Join(logDir, "dt=2026-11-09", "part-0.csv"), prefixUsers(t, raw.Bytes(), "g"))

	spec := `
[input]
paths = ["log"]
partition_columns = ["dt"]

[columns]
segments = ["platform", "dt"]

[output]
json = "readout.json"

[[experiment]]
key = "checkout-flow-2026"
control = "control"
arms = ["control", "one-page", "saved-basket"]
start = 2026-11-02T00:00:00Z
end = ` + a.AnalysisEnd().Format(time.RFC3339) + `
segments = ["platform", "dt"]

[[experiment.metric]]
name = "purchase"
events = ["purchase"]
window = "7d"

[[experiment.metric]]
name = "newsletter_signup"
events = ["newsletter_signup"]
window = "3d"
role = "secondary"

[[experiment]]
key = "gift-wrap-2026"
control = "control"
arms = ["control", "gift-wrap"]
start = 2026-11-09T00:00:00Z
end = ` + b.AnalysisEnd().Format(time.RFC3339) + `
segments = ["platform"]

[[experiment.metric]]
name = "purchase"
events = ["purchase"]
window = "7d"

[[experiment.metric]]
name = "newsletter_signup"
events = ["newsletter_signup"]
window = "3d"
`
	specPath := filepath.Join(dir, "experiments.toml")
	writeFile(t, specPath, []byte(spec))
	code, _, stderr := runCmd(t, "analyze", "--spec", specPath)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	rawJSON, err := os.ReadFile(filepath.Join(dir, "readout.json"))
	if err != nil {
		t.Fatal(err)
	}
	validate(t, rawJSON)
	readouts := decodeReadouts(t, rawJSON)
	if len(readouts) != 2 || readouts[0].Experiment != a.Experiment || readouts[1].Experiment != b.Experiment {
		t.Fatalf("readouts %d", len(readouts))
	}
	// Rows: the whole log is read once, so each readout counts every row.
	trA, trB := sampledata.NewTruth(a, 0, sumA), sampledata.NewTruth(b, 0, sumB)
	trA.Rows, trB.Rows = sumA.Rows+sumB.Rows, sumA.Rows+sumB.Rows
	checkTruth(t, readouts[0], trA)
	checkTruth(t, readouts[1], trB)

	// Segments: experiment A's units all come from dt=2026-11-02, and the
	// platform values partition every arm.
	for _, m := range readouts[0].Metrics {
		dims := map[string]int{}
		for _, s := range m.Segments {
			dims[s.Dimension]++
			if s.Dimension == "dt" && (s.Value == nil || *s.Value != "2026-11-02") {
				t.Errorf("%s: dt segment %v", m.Name, s.Value)
			}
		}
		if dims["platform"] != 3 || dims["dt"] != 1 {
			t.Errorf("%s: segment values per dimension %v, want platform 3, dt 1", m.Name, dims)
		}
	}
	if len(readouts[1].Metrics[0].Segments) != 3 {
		t.Errorf("gift-wrap: %d segment results, want 3 platforms", len(readouts[1].Metrics[0].Segments))
	}
}

// decodeReadouts decodes a JSON readout document.
func decodeReadouts(t *testing.T, raw []byte) []report.JSONReadout {
	t.Helper()
	var doc struct {
		Readouts []report.JSONReadout `json:"readouts"`
	}
	if err := json.Unmarshal(raw, &doc); err != nil {
		t.Fatal(err)
	}
	return doc.Readouts
}

func writeFile(t *testing.T, path string, data []byte) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
}

// prefixUsers rewrites the user_id column of a generated CSV log.
func prefixUsers(t *testing.T, data []byte, prefix string) []byte {
	t.Helper()
	r := csv.NewReader(bytes.NewReader(data))
	recs, err := r.ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if recs[0][0] != sampledata.ColUserID {
		t.Fatalf("first column %q", recs[0][0])
	}
	for _, rec := range recs[1:] {
		rec[0] = prefix + rec[0]
	}
	var out bytes.Buffer
	w := csv.NewWriter(&out)
	if err := w.WriteAll(recs); err != nil {
		t.Fatal(err)
	}
	if strings.Count(out.String(), "\n") != len(recs) {
		t.Fatal("rewritten CSV has a different number of lines")
	}
	return out.Bytes()
}
