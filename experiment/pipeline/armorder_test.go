package pipeline

import (
	"bytes"
	"context"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/ingest"
	"github.com/armtally/armtally/sampledata"
)

// The arm order of a readout does not follow the data: the same generator
// at other seeds and sizes (which show the arms first in other orders)
// gives the same order in every list of the readout: the control first,
// then the planned arms as given, or, with none planned, the other arms by
// name in byte order (so "Zed" before "one-page"). Common practice: a
// reader of JSON arrays by position needs one order.
func TestArmOrderAcrossSeedsAndSizes(t *testing.T) {
	cases := []struct {
		planned []string
		want    string
	}{
		{nil, "control Zed one-page saved-basket"},
		{[]string{"saved-basket", "Zed", "control", "one-page"}, "control saved-basket Zed one-page"},
	}
	for _, run := range []struct {
		users      int
		seed1, sd2 uint64
	}{{300, 1, 2}, {300, 7, 8}, {2000, 11, 12}, {9000, 5, 6}} {
		cfg := sampledata.DemoConfig()
		cfg.Users, cfg.NeverExposedUsers, cfg.ExposureDays = run.users, 0, 7
		cfg.Arms = []sampledata.ArmConfig{
			{Name: "control", Share: 1, Rates: []float64{0.10, 0.04}},
			{Name: "saved-basket", Share: 1, Rates: []float64{0.10, 0.04}},
			{Name: "one-page", Share: 1, Rates: []float64{0.12, 0.04}},
			{Name: "Zed", Share: 1, Rates: []float64{0.11, 0.04}},
		}
		var buf bytes.Buffer
		if _, err := sampledata.WriteParquet(&buf, cfg, rand.NewPCG(run.seed1, run.sd2)); err != nil {
			t.Fatal(err)
		}
		src := ingest.BytesSource("log.parquet", buf.Bytes())
		for _, tc := range cases {
			spec := specOf(cfg)
			spec.Arms = tc.planned
			spec.Segments = []string{sampledata.ColPlatform}
			m := ingest.DefaultMapping()
			m.Segments = spec.Segments
			res, err := Run(context.Background(), Input{Sources: []ingest.Source{src}, Mapping: m},
				[]Experiment{{Spec: spec, Options: experiment.DefaultAnalysisOptions()}}, Options{})
			if err != nil {
				t.Fatal(err)
			}
			where := strings.Join(tc.planned, ",")
			for _, got := range armLists(res.Readouts[0]) {
				if got.arms != tc.want && got.arms != strings.TrimPrefix(tc.want, "control ") {
					t.Errorf("%d units, seed %d, planned %q: %s in order %q, want %q",
						run.users, run.seed1, where, got.list, got.arms, tc.want)
				}
			}
		}
	}
}

type armList struct{ list, arms string }

// armLists returns every list of arms in a readout, each as its names
// joined by spaces (lists of treatments leave out the control).
func armLists(r experiment.Readout) []armList {
	var lists []armList
	add := func(list string, names []string) { lists = append(lists, armList{list, strings.Join(names, " ")}) }
	var names []string
	for _, a := range r.Arms {
		names = append(names, a.Name)
	}
	add("arms", names)
	names = nil
	for _, a := range r.Diagnostics.UnitsPerArm {
		names = append(names, a.Arm)
	}
	add("diagnostics", names)
	names = nil
	for _, tv := range r.Verdict.PerTreatment {
		names = append(names, tv.Treatment)
	}
	add("verdict", names)
	rates := func(list string, ars []experiment.ArmRate, cs []experiment.Comparison) {
		var a, c []string
		for _, ar := range ars {
			a = append(a, ar.Arm)
		}
		for _, cm := range cs {
			c = append(c, cm.Treatment)
		}
		add(list+" rates", a)
		add(list+" comparisons", c)
	}
	for _, m := range r.Metrics {
		rates(m.Name, m.Arms, m.Comparisons)
		for _, s := range m.Segments {
			rates(m.Name+" segment "+*s.Value, s.Arms, s.Comparisons)
		}
	}
	return lists
}
