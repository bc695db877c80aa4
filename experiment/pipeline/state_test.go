package pipeline_test

import (
	"bytes"
	"context"
	"encoding/csv"
	"errors"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/pipeline"
	"github.com/armtally/armtally/ingest"
	"github.com/armtally/armtally/report"
	"github.com/armtally/armtally/sampledata"
)

// exportDays generates a log with the sampledata generator and splits it
// into one CSV file per day, dt=YYYY-MM-DD/part-0.csv, as a warehouse
// export would; it returns the days' folders in order, each with its
// file's bytes.
func exportDays(t *testing.T) (days []string, files map[string][]byte) {
	t.Helper()
	cfg := sampledata.DemoConfig()
	cfg.Users, cfg.NeverExposedUsers, cfg.ExposureDays = 1000, 100, 30
	cfg.CrossArmProb = 0.05 // units that meet a second arm on a later day
	byDay := map[string][][]string{}
	err := sampledata.Generate(cfg, rand.NewPCG(5, 6), func(e sampledata.Event) error {
		d := "dt=" + e.TS.UTC().Format("2006-01-02")
		byDay[d] = append(byDay[d], []string{e.User, e.TS.UTC().Format(time.RFC3339Nano), e.Name, e.Experiment, e.Arm, e.Platform})
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	// The days before the first exposure hold only events of units not
	// yet exposed; a run over them alone stops (the log holds no row of
	// the exposure event), so they go into the first day with exposures.
	var ordered []string
	for d := range byDay {
		ordered = append(ordered, d)
	}
	slices.Sort(ordered)
	for len(ordered) > 1 && !slices.ContainsFunc(byDay[ordered[0]], func(r []string) bool { return r[2] == cfg.ExposureEvent }) {
		byDay[ordered[1]] = append(byDay[ordered[0]], byDay[ordered[1]]...)
		delete(byDay, ordered[0])
		ordered = ordered[1:]
	}
	files = map[string][]byte{}
	for d, rows := range byDay {
		var buf bytes.Buffer
		w := csv.NewWriter(&buf)
		w.Write(sampledata.Columns())
		w.WriteAll(rows)
		files[d] = buf.Bytes()
		days = append(days, d)
	}
	slices.Sort(days)
	return days, files
}

// stateExperiments are two experiments on the demo log: one with a closed
// window, a segment and multi-arm units left out; one with an open window
// (maturity against the data's freshness) that keeps a unit's first arm.
func stateExperiments() []pipeline.Experiment {
	start := time.Date(2026, 11, 2, 0, 0, 0, 0, time.UTC)
	end := start.AddDate(0, 0, 21)
	metrics := []experiment.Metric{{Name: "purchase", Events: []string{"purchase"}, Window: 7 * 24 * time.Hour},
		{Name: "newsletter_signup", Events: []string{"newsletter_signup"}, Window: 3 * 24 * time.Hour}}
	a := experiment.Spec{Key: "checkout-flow-2026", ExposureEvent: "exposure", Control: "control",
		Arms: []string{"control", "one-page", "saved-basket"}, Start: &start, End: &end,
		Metrics: metrics, Segments: []string{"platform"}}
	b := a
	b.End, b.Segments, b.MultiArm = nil, nil, experiment.MultiArmFirst
	return []pipeline.Experiment{{Spec: a, Options: experiment.DefaultAnalysisOptions()},
		{Spec: b, Options: experiment.DefaultAnalysisOptions()}}
}

// readoutBytes is the JSON and Markdown of a run's readouts.
func readoutBytes(t *testing.T, rs []experiment.Readout) string {
	t.Helper()
	var js, md bytes.Buffer
	if err := report.WriteJSON(&js, rs); err != nil {
		t.Fatal(err)
	}
	if err := report.WriteMarkdown(&md, rs, report.MarkdownOptions{}); err != nil {
		t.Fatal(err)
	}
	return js.String() + md.String()
}

func writeDay(t *testing.T, dir, day string, data []byte) {
	t.Helper()
	if err := os.MkdirAll(filepath.Join(dir, day), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, day, "part-0.csv"), data, 0o644); err != nil {
		t.Fatal(err)
	}
}

// run analyses dir, with the state file when state is not "".
func run(t *testing.T, dir, state string, exps []pipeline.Experiment) *pipeline.Result {
	t.Helper()
	res, err := pipeline.Run(context.Background(), pipeline.Input{Paths: []string{dir}, Mapping: ingest.Mapping{Segments: []string{"platform"}}}, exps, pipeline.Options{State: state, Workers: 2})
	if err != nil {
		t.Fatal(err)
	}
	return res
}

// Adding the days of a 30-day export one at a time, each night reading
// only the new day on top of the state file, gives the readouts of a run
// over all the days so far, byte for byte (common practice: an incremental
// aggregate must equal the batch one).
func TestIncrementalEqualsFull(t *testing.T) {
	days, files := exportDays(t)
	if len(days) < 30 {
		t.Fatalf("%d days of data, want at least 30", len(days))
	}
	dir := t.TempDir()
	state := filepath.Join(t.TempDir(), "tally.state")
	exps := stateExperiments()
	for i, d := range days {
		writeDay(t, dir, d, files[d])
		inc := run(t, dir, state, exps)
		full := run(t, dir, "", exps)
		if got, want := readoutBytes(t, inc.Readouts), readoutBytes(t, full.Readouts); got != want {
			t.Fatalf("after %s: the incremental readout differs from the full one", d)
		}
		st := inc.State
		if st.Recomputed || st.Resumed != (i > 0) || st.FilesRead != 1 || st.FilesTotal != i+1 {
			t.Fatalf("after %s: state report %+v, want resumed (but on the first day), 1 of %d files read", d, *st, i+1)
		}
		if inc.Stats.RowsRead != full.Stats.RowsRead || !slices.Equal(inc.Stats.BadRows, full.Stats.BadRows) {
			t.Fatalf("after %s: counts %+v, full run %+v", d, inc.Stats, full.Stats)
		}
		if i == len(days)-1 {
			// The target of the state's size (common practice for this
			// project: at most 100 bytes a unit).
			if st.Units < 1000 || st.Bytes > 100*st.Units {
				t.Errorf("state file %d bytes for %d unit records, want at most 100 a unit", st.Bytes, st.Units)
			}
			t.Logf("state file: %d bytes, %d unit records, %.1f bytes a unit", st.Bytes, st.Units, float64(st.Bytes)/float64(st.Units))
		}
	}
}

// lateExposureFile returns a day-10 file holding one exposure of a unit
// first exposed on day 20, in its arm: a late row before its saved first
// exposure, which a state saved after day 20 cannot absorb.
func lateExposureFile(t *testing.T, days []string, files map[string][]byte) []byte {
	t.Helper()
	var lateRow []string
	r := csv.NewReader(bytes.NewReader(files[days[20]]))
	recs, _ := r.ReadAll()
	for _, rec := range recs[1:] {
		if rec[2] == "exposure" && !strings.Contains(string(files[days[19]])+string(files[days[18]]), rec[0]+",") {
			lateRow = slices.Clone(rec)
			break
		}
	}
	if lateRow == nil {
		t.Fatal("no unit first exposed on day 20")
	}
	lateRow[1] = strings.Replace(lateRow[1], days[20][3:], days[10][3:], 1)
	return []byte(strings.Join(sampledata.Columns(), ",") + "\n" + strings.Join(lateRow, ",") + "\n")
}

// Each change the saved state cannot absorb makes the run read every file
// again, say so in each readout, and still give the full run's readouts
// otherwise; a late file the state can absorb does not.
func TestIncrementalRecompute(t *testing.T) {
	days, files := exportDays(t)
	exps := stateExperiments()
	lateExposure := lateExposureFile(t, days, files)
	lateNoise := []byte(strings.Join(sampledata.Columns(), ",") + "\n" + "u9999999," + days[10][3:] + "T12:00:00Z,page_view,,,web\n")

	tests := []struct {
		name   string
		change func(t *testing.T, dir string, exps []pipeline.Experiment) []pipeline.Experiment
		reason string // "" when the state absorbs the change
	}{
		{"late file, absorbable", func(t *testing.T, dir string, exps []pipeline.Experiment) []pipeline.Experiment {
			writeFile(t, filepath.Join(dir, days[10], "part-1.csv"), lateNoise)
			return exps
		}, ""},
		{"late file for an old day", func(t *testing.T, dir string, exps []pipeline.Experiment) []pipeline.Experiment {
			writeFile(t, filepath.Join(dir, days[10], "part-1.csv"), lateExposure)
			return exps
		}, "earlier than a unit's saved first exposure"},
		{"rewritten file", func(t *testing.T, dir string, exps []pipeline.Experiment) []pipeline.Experiment {
			data := files[days[3]] // without its last row
			writeFile(t, filepath.Join(dir, days[3], "part-0.csv"), data[:bytes.LastIndexByte(data[:len(data)-1], '\n')+1])
			return exps
		}, "changed since it was read"},
		{"removed file", func(t *testing.T, dir string, exps []pipeline.Experiment) []pipeline.Experiment {
			if err := os.RemoveAll(filepath.Join(dir, days[2])); err != nil {
				t.Fatal(err)
			}
			return exps
		}, "was read before and is gone"},
		{"changed definition", func(t *testing.T, dir string, exps []pipeline.Experiment) []pipeline.Experiment {
			exps = slices.Clone(exps)
			exps[0].Spec.Metrics = slices.Clone(exps[0].Spec.Metrics)
			exps[0].Spec.Metrics[0].Window = 5 * 24 * time.Hour
			return exps
		}, "definition of the run changed"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			state := filepath.Join(t.TempDir(), "tally.state")
			for _, d := range days[:25] {
				writeDay(t, dir, d, files[d])
			}
			run(t, dir, state, exps)
			writeDay(t, dir, days[25], files[days[25]])
			now := tc.change(t, dir, exps)
			inc := run(t, dir, state, now)
			full := run(t, dir, "", now)
			if tc.reason == "" {
				if !inc.State.Resumed || inc.State.FilesRead != 2 {
					t.Fatalf("state report %+v, want resumed with 2 files read", *inc.State)
				}
			} else {
				if !inc.State.Recomputed || !strings.Contains(inc.State.Reason, tc.reason) {
					t.Fatalf("state report %+v, want a recompute because %q", *inc.State, tc.reason)
				}
				for i := range inc.Readouts {
					ws := inc.Readouts[i].Warnings
					if n := len(ws); n == 0 || ws[n-1].Code != experiment.WarnStateRecomputed || ws[n-1].Reason != inc.State.Reason {
						t.Fatalf("readout %d: warnings %+v, want the recompute last", i, ws)
					}
					inc.Readouts[i].Warnings = ws[:len(ws)-1]
				}
			}
			if got, want := readoutBytes(t, inc.Readouts), readoutBytes(t, full.Readouts); got != want {
				t.Fatal("the readout differs from the full run's")
			}
			// The state written by the recompute is usable again.
			again := run(t, dir, state, now)
			if !again.State.Resumed || again.State.FilesRead != 0 {
				t.Fatalf("next run: state report %+v, want resumed with no file read", *again.State)
			}
		})
	}
}

func writeFile(t *testing.T, path string, data []byte) {
	t.Helper()
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
}

// A damaged state file is not trusted: the run reads every file again.
func TestIncrementalDamagedState(t *testing.T) {
	days, files := exportDays(t)
	dir := t.TempDir()
	state := filepath.Join(t.TempDir(), "tally.state")
	for _, d := range days[:5] {
		writeDay(t, dir, d, files[d])
	}
	exps := stateExperiments()
	run(t, dir, state, exps)
	b, err := os.ReadFile(state)
	if err != nil {
		t.Fatal(err)
	}
	want := readoutBytes(t, run(t, dir, "", exps).Readouts)
	damage := []struct {
		name, reason string
		edit         func([]byte) []byte
	}{
		{"a byte of a block", "damaged", func(b []byte) []byte { b[len(b)/2] ^= 0x40; return b }},
		{"a byte of the trailer", "damaged", func(b []byte) []byte { b[len(b)-30] ^= 0x01; return b }},
		{"cut in half", "damaged", func(b []byte) []byte { return b[:len(b)/2] }},
		{"cut by a byte", "damaged", func(b []byte) []byte { return b[:len(b)-1] }},
		// The layout version follows the magic line's length and bytes.
		{"layout 1", "layout 1", func(b []byte) []byte { b[1+len("armtally-state\n")] = 2; return b }},
		{"empty", "not one armtally wrote", func([]byte) []byte { return nil }},
	}
	for _, dc := range damage {
		writeFile(t, state, dc.edit(slices.Clone(b)))
		res := run(t, dir, state, exps)
		if !res.State.Recomputed || !strings.Contains(res.State.Reason, dc.reason) {
			t.Fatalf("%s: state report %+v, want a recompute (%q)", dc.name, *res.State, dc.reason)
		}
		if !strings.Contains(readoutBytes(t, res.Readouts), dc.reason) {
			t.Fatalf("%s: the readout does not say why every file was read again", dc.name)
		}
		// The recompute saved a sound state: the next run resumes from it.
		again := run(t, dir, state, exps)
		if !again.State.Resumed || readoutBytes(t, again.Readouts) != want {
			t.Fatalf("%s: after the recompute, state report %+v or a readout other than the full run's", dc.name, *again.State)
		}
	}
	_, err = pipeline.Run(context.Background(), pipeline.Input{Sources: []ingest.Source{ingest.BytesSource("a.csv", files[days[0]])}},
		exps, pipeline.Options{State: state, MemoryLimit: 1 << 30})
	var ce *pipeline.ConfigError
	if !errors.As(err, &ce) {
		t.Fatalf("state with a memory limit: error %v, want a ConfigError", err)
	}
}

// A resumed run keeps the per-unit records of the audit table: those of a
// full run, in the same order (common practice: an incremental aggregate
// must equal the batch one).
func TestIncrementalKeepsUnits(t *testing.T) {
	days, files := exportDays(t)
	dir := t.TempDir()
	state := filepath.Join(t.TempDir(), "tally.state")
	exps := stateExperiments()
	runUnits := func(state string) (*pipeline.Result, [][]experiment.UnitRecord) {
		res, err := pipeline.Run(context.Background(), pipeline.Input{Paths: []string{dir}, Mapping: ingest.Mapping{Segments: []string{"platform"}}},
			exps, pipeline.Options{State: state, Workers: 2, KeepUnits: true})
		if err != nil {
			t.Fatal(err)
		}
		var all [][]experiment.UnitRecord
		for i := range exps {
			units, err := res.Units(i)
			if err != nil {
				t.Fatal(err)
			}
			all = append(all, slices.Collect(units))
		}
		return res, all
	}
	for i, d := range days[:12] {
		writeDay(t, dir, d, files[d])
		inc, got := runUnits(state)
		_, want := runUnits("")
		if inc.State.Resumed != (i > 0) {
			t.Fatalf("after %s: state report %+v", d, *inc.State)
		}
		if !reflect.DeepEqual(got, want) {
			t.Fatalf("after %s: the resumed run's unit records differ from the full run's", d)
		}
	}
}

// A rerun look (as-of) that counts immature units resumes night by night
// while every row is before its date, and reads every file again once the
// rows of other events pass it (the freshness of rows the reader leaves
// out is judged over all of them): its readouts are a full run's each
// night (common practice: an incremental aggregate must equal the batch
// one).
func TestIncrementalAsOf(t *testing.T) {
	days, files := exportDays(t)
	exps := stateExperiments()[1:]
	asOf := exps[0].Spec.Start.AddDate(0, 0, 10)
	exps[0].Spec.AsOf, exps[0].Spec.Maturity = &asOf, experiment.MaturityInclude
	dir := t.TempDir()
	state := filepath.Join(t.TempDir(), "tally.state")
	recomputed := 0
	for i, d := range days[:16] {
		writeDay(t, dir, d, files[d])
		inc := run(t, dir, state, exps)
		full := run(t, dir, "", exps)
		if st := inc.State; st.Recomputed {
			recomputed++
			if !strings.Contains(st.Reason, "as-of") {
				t.Fatalf("after %s: recomputed for %q", d, st.Reason)
			}
			ws := inc.Readouts[0].Warnings
			if n := len(ws); n == 0 || ws[n-1].Code != experiment.WarnStateRecomputed {
				t.Fatalf("after %s: warnings %+v, want the recompute last", d, ws)
			}
			inc.Readouts[0].Warnings = ws[:len(ws)-1]
		} else if i > 0 && !inc.State.Resumed {
			t.Fatalf("after %s: state report %+v", d, *inc.State)
		}
		if readoutBytes(t, inc.Readouts) != readoutBytes(t, full.Readouts) {
			t.Fatalf("after %s: the incremental readout differs from the full one", d)
		}
	}
	if recomputed == 0 || recomputed == 15 {
		t.Errorf("%d of 15 nights recomputed, want the nights past the as-of date only", recomputed)
	}
}

// BeforeRead learns the size of the files a run reads before it reads
// them: every file for a run without a state and for the first night, the
// new file alone for a night that resumes, every file again for a night
// that has to recompute (the sizes are the files' own, from os.Stat).
func TestBeforeReadSizes(t *testing.T) {
	days, files := exportDays(t)
	dir := t.TempDir()
	state := filepath.Join(t.TempDir(), "tally.state")
	exps := stateExperiments()
	var total int64
	for _, d := range days[:3] {
		writeDay(t, dir, d, files[d])
		total += int64(len(files[d]))
	}
	runSizes := func(dir, state string, exps []pipeline.Experiment) []int64 {
		t.Helper()
		var got []int64
		opts := pipeline.Options{State: state, Workers: 2, BeforeRead: func(n int64) { got = append(got, n) }}
		in := pipeline.Input{Paths: []string{dir}, Mapping: ingest.Mapping{Segments: []string{"platform"}}}
		if _, err := pipeline.Run(context.Background(), in, exps, opts); err != nil {
			t.Fatal(err)
		}
		return got
	}
	if got := runSizes(dir, "", exps); !slices.Equal(got, []int64{total}) {
		t.Errorf("run without a state: BeforeRead got %v, want [%d]", got, total)
	}
	if got := runSizes(dir, state, exps); !slices.Equal(got, []int64{total}) {
		t.Errorf("first night: BeforeRead got %v, want [%d]", got, total)
	}
	writeDay(t, dir, days[3], files[days[3]])
	day := int64(len(files[days[3]]))
	total += day
	if got := runSizes(dir, state, exps); !slices.Equal(got, []int64{day}) {
		t.Errorf("night that resumes: BeforeRead got %v, want [%d]", got, day)
	}
	changed := slices.Clone(exps)
	changed[0].Spec.Metrics = slices.Clone(changed[0].Spec.Metrics)
	changed[0].Spec.Metrics[0].Window = 5 * 24 * time.Hour
	if got := runSizes(dir, state, changed); !slices.Equal(got, []int64{total}) {
		t.Errorf("night with a changed definition: BeforeRead got %v, want [%d]", got, total)
	}

	// A night that resumes and then meets a row its state cannot absorb
	// is told of its new files, then of every file.
	dir, state, total = t.TempDir(), filepath.Join(t.TempDir(), "tally.state"), 0
	for _, d := range days[:21] {
		writeDay(t, dir, d, files[d])
		total += int64(len(files[d]))
	}
	runSizes(dir, state, exps)
	late := lateExposureFile(t, days, files)
	writeFile(t, filepath.Join(dir, days[10], "part-1.csv"), late)
	writeDay(t, dir, days[21], files[days[21]])
	fresh := int64(len(late) + len(files[days[21]]))
	total += fresh
	if got := runSizes(dir, state, exps); !slices.Equal(got, []int64{fresh, total}) {
		t.Errorf("night that recomputes: BeforeRead got %v, want [%d %d]", got, fresh, total)
	}
}
