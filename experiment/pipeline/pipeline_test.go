package pipeline

import (
	"bytes"
	"context"
	"errors"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"sync/atomic"
	"testing"
	"testing/fstest"
	"time"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/ingest"
	"github.com/armtally/armtally/sampledata"
)

// genLog writes a generated log of users units (Parquet, or CSV when csv
// is set) and returns its source and the generator's ground truth, which
// the generator counts while it places the events, without armtally's
// reader or tallier.
func genLog(t *testing.T, users int, csv bool) (ingest.Source, sampledata.Config, sampledata.Summary) {
	t.Helper()
	name, data, cfg, sum := genData(t, users, csv)
	return ingest.BytesSource(name, data), cfg, sum
}

// genData is genLog's file name and bytes.
func genData(t *testing.T, users int, csv bool) (string, []byte, sampledata.Config, sampledata.Summary) {
	t.Helper()
	cfg := sampledata.DemoConfig()
	cfg.Users, cfg.NeverExposedUsers, cfg.ExposureDays = users, users/50, 7
	var buf bytes.Buffer
	write, name := sampledata.WriteParquet, "log.parquet"
	if csv {
		write, name = sampledata.WriteCSV, "log.csv"
	}
	sum, err := write(&buf, cfg, rand.NewPCG(11, 12))
	if err != nil {
		t.Fatal(err)
	}
	return name, buf.Bytes(), cfg, sum
}

// specOf is the experiment the generator describes: every arm, every
// metric with its window, the window [Start, AnalysisEnd) in which every
// unit is mature, multi-arm units left out (sampledata.Summary's
// population).
func specOf(cfg sampledata.Config) experiment.Spec {
	start, end := cfg.Start, cfg.AnalysisEnd()
	spec := experiment.Spec{Key: cfg.Experiment, ExposureEvent: cfg.ExposureEvent, Control: cfg.Arms[0].Name,
		Start: &start, End: &end}
	for _, a := range cfg.Arms {
		spec.Arms = append(spec.Arms, a.Name)
	}
	for _, m := range cfg.Metrics {
		spec.Metrics = append(spec.Metrics, experiment.Metric{Name: m.Event, Events: []string{m.Event}, Window: m.Window})
	}
	return spec
}

func oneExperiment(cfg sampledata.Config) []Experiment {
	return []Experiment{{Spec: specOf(cfg), Options: experiment.DefaultAnalysisOptions()}}
}

// checkTruth compares the readout's per-arm units and conversions with
// the generator's ground truth.
func checkTruth(t *testing.T, r experiment.Readout, cfg sampledata.Config, sum sampledata.Summary) {
	t.Helper()
	if len(r.Metrics) != len(cfg.Metrics) {
		t.Fatalf("%d metrics, want %d", len(r.Metrics), len(cfg.Metrics))
	}
	for m, mr := range r.Metrics {
		if len(mr.Arms) != len(cfg.Arms) {
			t.Fatalf("metric %s: %d arms, want %d", mr.Name, len(mr.Arms), len(cfg.Arms))
		}
		for a, ar := range mr.Arms {
			if ar.Arm != cfg.Arms[a].Name || ar.Units != sum.SingleArmUnits[a] || ar.Conversions != sum.Converted[a][m] {
				t.Errorf("metric %s arm %s: %d units, %d conversions; ground truth %s: %d, %d", mr.Name, ar.Arm,
					ar.Units, ar.Conversions, cfg.Arms[a].Name, sum.SingleArmUnits[a], sum.Converted[a][m])
			}
		}
	}
}

// Every way of running gives the generator's ground truth and the same
// readout: in memory, spilled to disk in groups of partitions, from CSV.
func TestRunMatchesGroundTruth(t *testing.T) {
	pq, cfg, sum := genLog(t, 4000, false)
	csv, _, _ := genLog(t, 4000, true)
	var first *experiment.Readout
	for _, tc := range []struct {
		name string
		in   Input
		opts Options
	}{
		{"parquet in memory", Input{Sources: []ingest.Source{pq}}, Options{}},
		{"parquet one worker", Input{Sources: []ingest.Source{pq}}, Options{Workers: 1}},
		{"csv in memory", Input{Sources: []ingest.Source{csv}}, Options{}},
		// 20 kB of state: about 200 rows a group, so many groups merged.
		{"parquet spilled", Input{Sources: []ingest.Source{pq}}, Options{MemoryLimit: 20_000, SpillDir: t.TempDir()}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			res, err := Run(context.Background(), tc.in, oneExperiment(cfg), tc.opts)
			if err != nil {
				t.Fatal(err)
			}
			r := res.Readouts[0]
			checkTruth(t, r, cfg, sum)
			if res.Stats.RowsRead != sum.Rows || r.Diagnostics.RowsRead != sum.Rows {
				t.Errorf("rows read %d (readout %d), generator wrote %d", res.Stats.RowsRead, r.Diagnostics.RowsRead, sum.Rows)
			}
			if first == nil {
				first = &r
			} else if !reflect.DeepEqual(r, *first) {
				t.Errorf("readout differs from the first case's")
			}
		})
	}
}

// Two experiments read in one pass each get their own readout, equal to
// the readout of a run of that experiment alone.
func TestRunSeveralExperiments(t *testing.T) {
	src, cfg, sum := genLog(t, 3000, false)
	short := specOf(cfg)
	short.Key = "" // takes every exposure row: the log has one experiment
	short.Metrics = short.Metrics[:1]
	exps := append(oneExperiment(cfg), Experiment{Spec: short, Options: experiment.DefaultAnalysisOptions()})
	res, err := Run(context.Background(), Input{Sources: []ingest.Source{src}}, exps, Options{})
	if err != nil {
		t.Fatal(err)
	}
	checkTruth(t, res.Readouts[0], cfg, sum)
	alone, err := Run(context.Background(), Input{Sources: []ingest.Source{src}}, exps[1:], Options{})
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(res.Readouts[1], alone.Readouts[0]) {
		t.Errorf("second experiment's readout differs from its run alone")
	}
}

// Paths on disk are resolved as the command line resolves them.
func TestRunPaths(t *testing.T) {
	_, data, cfg, sum := genData(t, 2000, false)
	dir := t.TempDir()
	if err := os.MkdirAll(filepath.Join(dir, "dt=2026-11-02"), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "dt=2026-11-02", "part-0.parquet"), data, 0o644); err != nil {
		t.Fatal(err)
	}
	res, err := Run(context.Background(), Input{Paths: []string{dir}}, oneExperiment(cfg), Options{})
	if err != nil {
		t.Fatal(err)
	}
	checkTruth(t, res.Readouts[0], cfg, sum)
	_, err = Run(context.Background(), Input{Paths: []string{t.TempDir()}}, oneExperiment(cfg), Options{})
	var de *DataError
	if !errors.As(err, &de) {
		t.Errorf("empty folder: error %v, want a DataError", err)
	}
}

// An fs.FS holding a partitioned export gives the same readout as the
// same files on disk.
func TestRunFS(t *testing.T) {
	_, data, cfg, sum := genData(t, 2000, false)
	fsys := fstest.MapFS{
		"exports/dt=2026-11-02/part-0.parquet": {Data: data},
		"exports/_SUCCESS":                     {Data: nil},
	}
	for _, in := range []Input{
		{FS: fsys},
		{FS: fsys, Paths: []string{"exports"}},
		{FS: fsys, Paths: []string{"exports/dt=*/*.parquet"}},
	} {
		res, err := Run(context.Background(), in, oneExperiment(cfg), Options{})
		if err != nil {
			t.Fatalf("%v: %v", in.Paths, err)
		}
		checkTruth(t, res.Readouts[0], cfg, sum)
	}
}

// The per-unit records kept for the audit table number the exposed units
// of the ground truth, multi-arm units included (they are listed with
// their status).
func TestRunKeepUnits(t *testing.T) {
	src, cfg, sum := genLog(t, 2000, false)
	res, err := Run(context.Background(), Input{Sources: []ingest.Source{src}}, oneExperiment(cfg), Options{KeepUnits: true})
	if err != nil {
		t.Fatal(err)
	}
	units, err := res.Units(0)
	if err != nil {
		t.Fatal(err)
	}
	n := int64(0)
	for range units {
		n++
	}
	if n != sum.Units {
		t.Errorf("%d unit records, generator exposed %d units", n, sum.Units)
	}
	res, err = Run(context.Background(), Input{Sources: []ingest.Source{src}}, oneExperiment(cfg), Options{})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := res.Units(0); err == nil {
		t.Error("Units without KeepUnits: no error")
	}
}

// A cancelled run stops, returns the context's error, and leaves no
// partition files behind.
func TestRunCancelled(t *testing.T) {
	src, cfg, _ := genLog(t, 3000, false)
	for _, limit := range []int64{0, 20_000} {
		spillDir := t.TempDir()
		ctx, cancel := context.WithCancel(context.Background())
		var calls atomic.Int32
		opts := Options{MemoryLimit: limit, SpillDir: spillDir, Workers: 1,
			Progress: func(rows func() int64) func() {
				calls.Add(1)
				cancel() // cancel as soon as reading starts
				return func() {}
			}}
		_, err := Run(ctx, Input{Sources: []ingest.Source{src}}, oneExperiment(cfg), opts)
		if !errors.Is(err, context.Canceled) {
			t.Errorf("limit %d: error %v, want context.Canceled", limit, err)
		}
		left, _ := os.ReadDir(spillDir)
		if len(left) != 0 {
			t.Errorf("limit %d: %d entries left in the spill folder", limit, len(left))
		}
		if calls.Load() != 1 {
			t.Errorf("limit %d: Progress called %d times, want 1", limit, calls.Load())
		}
	}
}

// Progress sees the rows of an event log as they are read.
func TestRunProgress(t *testing.T) {
	src, cfg, sum := genLog(t, 2000, false)
	var counter func() int64
	stopped := 0
	opts := Options{Progress: func(rows func() int64) func() {
		counter = rows
		return func() { stopped++ }
	}}
	if _, err := Run(context.Background(), Input{Sources: []ingest.Source{src}}, oneExperiment(cfg), opts); err != nil {
		t.Fatal(err)
	}
	if counter == nil {
		t.Fatal("Progress was not called")
	}
	if got := counter(); got != sum.Rows || stopped != 1 {
		t.Errorf("progress: counter ends at %d rows (want %d), stopped %d times (want 1)", got, sum.Rows, stopped)
	}
}

// Settings that cannot work are refused before anything is read.
func TestRunConfigErrors(t *testing.T) {
	src, cfg, _ := genLog(t, 200, false)
	in := Input{Sources: []ingest.Source{src}}
	other := oneExperiment(cfg)[0]
	other.Spec.ExposureEvent = "assigned"
	noMetrics := oneExperiment(cfg)[0]
	noMetrics.Spec.Metrics = nil
	for _, tc := range []struct {
		name string
		in   Input
		exps []Experiment
		opts Options
	}{
		{"no experiments", in, nil, Options{}},
		{"no input", Input{}, oneExperiment(cfg), Options{}},
		{"two inputs", Input{Sources: in.Sources, Paths: []string{"x"}}, oneExperiment(cfg), Options{}},
		{"memory limit and units", in, oneExperiment(cfg), Options{MemoryLimit: 1 << 20, KeepUnits: true}},
		{"memory limit on a table", Input{Sources: in.Sources, Shape: experiment.InputCounts}, oneExperiment(cfg), Options{MemoryLimit: 1 << 20}},
		{"two experiments in a table", Input{Sources: in.Sources, Shape: experiment.InputUnitTable}, append(oneExperiment(cfg), oneExperiment(cfg)...), Options{}},
		{"different exposure events", in, append(oneExperiment(cfg), other), Options{}},
		{"no metrics", in, []Experiment{noMetrics}, Options{}},
	} {
		_, err := Run(context.Background(), tc.in, tc.exps, tc.opts)
		var ce *ConfigError
		if !errors.As(err, &ce) {
			t.Errorf("%s: error %v, want a ConfigError", tc.name, err)
		}
	}
}

// A malformed row is a DataError that names the file.
func TestRunDataError(t *testing.T) {
	src := ingest.BytesSource("bad.csv", []byte("user_id,ts,event,experiment,arm\nu1,not-a-time,exposure,e,control\n"))
	spec := experiment.Spec{Key: "e", ExposureEvent: "exposure", Control: "control",
		Metrics: []experiment.Metric{{Name: "buy", Events: []string{"buy"}, Window: 24 * time.Hour}}}
	_, err := Run(context.Background(), Input{Sources: []ingest.Source{src}},
		[]Experiment{{Spec: spec, Options: experiment.DefaultAnalysisOptions()}}, Options{})
	var de *DataError
	if !errors.As(err, &de) || !bytes.Contains([]byte(err.Error()), []byte("bad.csv")) {
		t.Errorf("error %v, want a DataError naming bad.csv", err)
	}
}

// readShare is the reader's rows read over the rows the Parquet footers
// list: it rises to exactly 1 as a Parquet input is read, and is unknown
// (nil) for a CSV input or sources not listed.
func TestReadShare(t *testing.T) {
	pq, _, _ := genLog(t, 3000, false)
	csv, _, _ := genLog(t, 300, true)
	open := func(srcs ...ingest.Source) *ingest.Reader {
		r, err := ingest.NewReader(srcs, ingest.Options{Mapping: ingest.DefaultMapping(), BatchSize: 1000})
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(func() { r.Close() })
		return r
	}
	r := open(pq, pq)
	share := readShare(r, []ingest.Source{pq, pq})
	if share == nil {
		t.Fatal("no share for a Parquet input")
	}
	last, steps := 0.0, 0
	for r.Next() {
		s := share()
		if s < last || s <= 0 || s > 1 {
			t.Fatalf("share %v after %v", s, last)
		}
		last, steps = s, steps+1
	}
	if err := r.Err(); err != nil {
		t.Fatal(err)
	}
	if last != 1 || steps < 4 {
		t.Errorf("share %v after %d batches, want 1 after several", last, steps)
	}
	if readShare(open(pq, csv), []ingest.Source{pq, csv}) != nil || readShare(open(pq), nil) != nil {
		t.Error("a share for a CSV input or for sources not listed")
	}
}
