package warehousecheck

import (
	"bytes"
	"context"
	"testing"
	"time"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/pipeline"
	"github.com/armtally/armtally/experiment/warehouse"
	"github.com/armtally/armtally/ingest"
	"github.com/armtally/armtally/report"
)

// definition is one experiment definition the equality tests run both
// ways: armtally over the Parquet file, and the emitted query in an
// engine over the same rows.
type definition struct {
	name string
	cols warehouse.Columns
	exps []pipeline.Experiment
}

func day(n float64) time.Time {
	return logStart.Add(time.Duration(n * float64(24*time.Hour)))
}

func tp(t time.Time) *time.Time { return &t }

func metric(name string, w time.Duration, events ...string) experiment.Metric {
	return experiment.Metric{Name: name, Events: events, Window: w}
}

// weirdArm is an arm name with quotes, a backslash and a semicolon.
const weirdArm = `o'brien "b" \arm;`

// definitions are the definitions of the equality tests: windows, both
// multi-arm policies, both maturity policies, segments, start and end
// alone and together, several metrics with several events, two
// experiments in one pass, and a table read without its experiment
// column.
func definitions() []definition {
	cols := warehouse.Columns{User: "user_id", TS: "ts", Event: "event", Experiment: "experiment", Arm: "arm"}
	opts := experiment.DefaultAnalysisOptions()
	exp := func(s experiment.Spec) pipeline.Experiment {
		s.ExposureEvent = "exposure"
		s.Control = "control"
		return pipeline.Experiment{Spec: s, Options: opts}
	}
	noExp := cols
	noExp.Experiment = ""
	return []definition{
		{"window exclude segments", cols, []pipeline.Experiment{exp(experiment.Spec{
			Key: "checkout-2026", Arms: []string{"control", "treatment", weirdArm},
			Start: tp(day(2)), End: tp(day(15)),
			Metrics:  []experiment.Metric{metric("purchase", 7*24*time.Hour, "purchase"), metric("engaged", 36*time.Hour, "signup", "refund")},
			Segments: []string{"platform", "country"},
		})}},
		{"first include open window", cols, []pipeline.Experiment{exp(experiment.Spec{
			Key: "checkout-2026", MultiArm: experiment.MultiArmFirst, Maturity: experiment.MaturityInclude,
			Metrics:  []experiment.Metric{metric("purchase", 2*24*time.Hour, "purchase"), metric("any", 0, "purchase", "signup")},
			Segments: []string{"country"},
		})}},
		{"two experiments start only and end only", cols, []pipeline.Experiment{
			exp(experiment.Spec{
				Key: "checkout-2026", MultiArm: experiment.MultiArmFirst, Start: tp(day(5)),
				Metrics: []experiment.Metric{metric("purchase", 3*24*time.Hour+1500*time.Millisecond, "purchase")},
			}),
			exp(experiment.Spec{
				Key: "search;DROP TABLE x", Arms: []string{"control", "treatment", weirdArm}, End: tp(day(12.5)),
				Metrics:  []experiment.Metric{metric("signup", 24*time.Hour, "signup"), metric("refund", 0, "refund")},
				Segments: []string{"platform"},
			}),
		}},
		{"no experiment column", noExp, []pipeline.Experiment{exp(experiment.Spec{
			MultiArm: experiment.MultiArmFirst, End: tp(day(18)),
			Metrics: []experiment.Metric{metric("purchase", 5*24*time.Hour, "purchase", "click")},
		})}},
	}
}

// mapping is the column mapping of a definition for armtally's reader.
func (d definition) mapping() ingest.Mapping {
	m := ingest.Mapping{User: d.cols.User, TS: d.cols.TS, Event: d.cols.Event, Experiment: d.cols.Experiment, Arm: d.cols.Arm}
	for _, e := range d.exps {
		for _, s := range e.Spec.Segments {
			if !contains(m.Segments, s) {
				m.Segments = append(m.Segments, s)
			}
		}
	}
	return m
}

func contains(list []string, s string) bool {
	for _, v := range list {
		if v == s {
			return true
		}
	}
	return false
}

// query builds the definition's query over table.
func (d definition) query(t testing.TB, table ...string) *warehouse.Query {
	t.Helper()
	def := warehouse.Definition{Table: table, Columns: d.cols}
	for _, e := range d.exps {
		def.Experiments = append(def.Experiments, e.Spec)
	}
	q, err := warehouse.Build(def)
	if err != nil {
		t.Fatalf("%s: %v", d.name, err)
	}
	return q
}

// armtallyJSON is armtally's JSON readouts of the definition over the
// Parquet file, every bad row skipped and counted.
func (d definition) armtallyJSON(t testing.TB, path string) []byte {
	t.Helper()
	in := pipeline.Input{Paths: []string{path}, Mapping: d.mapping(), MaxBadRows: ingest.NoLimit}
	res, err := pipeline.Run(context.Background(), in, d.exps, pipeline.Options{})
	if err != nil {
		t.Fatalf("%s: armtally: %v", d.name, err)
	}
	var b bytes.Buffer
	if err := report.WriteJSON(&b, res.Readouts); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

// warehouseJSON is the JSON readouts of the query's result rows.
func (d definition) warehouseJSON(t testing.TB, q *warehouse.Query, rows []*warehouse.Row) []byte {
	t.Helper()
	tallies, in, err := q.Decode(rows)
	if err != nil {
		t.Fatalf("%s: decode: %v", d.name, err)
	}
	var readouts []experiment.Readout
	for i, e := range d.exps {
		o := e.Options
		o.RowsRead, o.BadRows = in.RowsRead, in.BadRows
		r, err := experiment.Analyze(e.Spec, tallies[i], o)
		if err != nil {
			t.Fatalf("%s: analyze: %v", d.name, err)
		}
		readouts = append(readouts, r)
	}
	var b bytes.Buffer
	if err := report.WriteJSON(&b, readouts); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

// sameReadouts fails the test when the two JSON readouts differ, showing
// the first differing line.
func sameReadouts(t *testing.T, name string, want, got []byte) {
	t.Helper()
	if bytes.Equal(want, got) {
		return
	}
	wl, gl := bytes.Split(want, []byte("\n")), bytes.Split(got, []byte("\n"))
	for i := 0; i < len(wl) && i < len(gl); i++ {
		if !bytes.Equal(wl[i], gl[i]) {
			lo := max(0, i-6)
			t.Fatalf("%s: readouts differ at line %d:\narmtally: %s\nquery:    %s\ncontext (armtally):\n%s", name, i+1, wl[i], gl[i], bytes.Join(wl[lo:min(len(wl), i+3)], []byte("\n")))
		}
	}
	t.Fatalf("%s: readouts differ in length: %d and %d lines", name, len(wl), len(gl))
}
