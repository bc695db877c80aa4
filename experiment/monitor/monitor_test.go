package monitor

import (
	"math"
	"slices"
	"testing"
	"time"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/history"
	"github.com/armtally/armtally/experiment/sequential"
)

var night = time.Date(2026, 11, 12, 0, 0, 0, 0, time.UTC)

// readout is a two-arm readout of one primary metric: control 100 of
// 1,000 and treatment xt of nt, with the z statistic z and the difference
// interval [lo, hi].
func readout(nt, xt int64, z, lo, hi float64, primaries int) experiment.Readout {
	start := night.AddDate(0, 0, -10)
	fresh := night.Add(-time.Hour)
	r := experiment.Readout{Experiment: "exp", Control: "control", WindowStart: &start, Freshness: &fresh,
		Settings:     experiment.Settings{Alpha: 0.05, Alternative: "two-sided", Adjustment: "holm"},
		Multiplicity: experiment.Multiplicity{Role: experiment.Primary, Size: primaries},
		Arms:         []experiment.ArmUnits{{Name: "control", Units: 1000}, {Name: "t", Units: nt}}}
	rc, rt := 0.1, float64(xt)/float64(nt)
	r.Metrics = []experiment.MetricReadout{{Name: "buy", Role: experiment.Primary,
		Arms: []experiment.ArmRate{{Arm: "control", Units: 1000, Conversions: 100, Rate: &rc}, {Arm: "t", Units: nt, Conversions: xt, Rate: &rt}},
		Comparisons: []experiment.Comparison{{Treatment: "t", Control: "control", Z: &experiment.Test{Statistic: z},
			DifferenceInterval: &experiment.Interval{Lower: lo, Upper: hi}}}}}
	return r
}

// earlier is a stored look a day before night: a group-sequential row at
// fraction f with statistic z and the given counts of the treatment.
func earlier(f, z float64, crossed bool, nt, xt int64) history.Look {
	nan := math.NaN()
	return history.Look{Experiment: "exp", At: night.AddDate(0, 0, -1), KeyKind: history.AsOf,
		Arms: []history.ArmLook{{Metric: "buy", Arm: "control", Units: 900, Conversions: 90}, {Metric: "buy", Arm: "t", Units: nt, Conversions: xt}},
		Comparisons: []history.ComparisonLook{{Metric: "buy", Arm: "t", Control: "control", Method: experiment.MethodGroupSequential,
			Statistic: z, InformationFraction: f, Boundary: nan, BoundaryNominalP: nan, AlphaSpent: nan, Crossed: crossed,
			AlwaysValidP: nan, SequenceLower: nan, SequenceUpper: nan}}}
}

func TestCompute(t *testing.T) {
	settings := Settings{Default: OBrienFleming, PlannedUnits: 2000, At: night, KeyKind: history.AsOf, Now: night, MaxStaleness: 36 * time.Hour}
	cases := []struct {
		name      string
		r         experiment.Readout
		looks     []history.Look
		alpha     float64 // the comparison's alpha: 0.05 split over the family (Bonferroni)
		fractions []float64
		notTested bool
		changes   []string
	}{
		// Two primary metrics: 0.05 / 2 (Bonferroni, common practice).
		{"first look, family of two", readout(1000, 120, 1.4, 0.0, 0.05, 2), nil, 0.025, []float64{0.5}, false, nil},
		// The previous look at fraction 0.4 with 90 of 900 in both arms
		// (difference 0) lies outside tonight's interval [0.001, 0.05], and
		// a crossing at the previous look that tonight's z 0.5 does not
		// repeat flips the stored decision.
		{"second look, moved and flipped", readout(1000, 120, 0.5, 0.001, 0.05, 1), []history.Look{earlier(0.4, 9, true, 900, 90)}, 0.05,
			[]float64{0.4, 0.5}, false, []string{"decision_flipped", "estimate_moved"}},
		// Units removed by a data fix: 0.5 after 0.6 is not tested.
		{"fraction did not grow", readout(1000, 120, 1.4, -0.02, 0.05, 1), []history.Look{earlier(0.6, 1, false, 900, 108)}, 0.05, nil, true, nil},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			m, look, err := Compute(tc.r, settings, tc.looks)
			if err != nil {
				t.Fatal(err)
			}
			c := m.Comparisons[0]
			if c.Alpha != tc.alpha || (c.NotTested != "") != tc.notTested || m.Look != len(tc.looks)+1 {
				t.Fatalf("alpha %v, not tested %q, look %d", c.Alpha, c.NotTested, m.Look)
			}
			if !tc.notTested {
				b, err := sequential.Boundaries(sequential.Spending{Kind: sequential.OBrienFleming, Alpha: tc.alpha}, sequential.TwoSided, tc.fractions)
				if err != nil {
					t.Fatal(err)
				}
				if *c.Boundary != b.Looks[len(tc.fractions)-1].Critical {
					t.Errorf("boundary %v, want %v", *c.Boundary, b.Looks[len(tc.fractions)-1].Critical)
				}
			}
			var kinds []string
			for _, ch := range m.Changes {
				kinds = append(kinds, ch.Kind)
			}
			if len(kinds) != len(tc.changes) || len(kinds) > 0 && (kinds[0] != tc.changes[0] || kinds[len(kinds)-1] != tc.changes[len(tc.changes)-1]) {
				t.Errorf("changes %v, want %v", kinds, tc.changes)
			}
			if len(look.Arms) != 2 || len(look.Comparisons) != 1 || !look.At.Equal(night) {
				t.Errorf("look to store: %+v", look)
			}
		})
	}
}

// TestProgress: 1,000 and 1,000 (or 800) units after 10 days are 100 and
// 80 a day; 2,000 planned leaves max(1000/100, 1200/80) = 15 days (hand
// calculation). The freshness an hour before the look is not stale at 36h,
// and is at 30 minutes.
func TestProgress(t *testing.T) {
	cases := []struct {
		nt       int64
		max      time.Duration
		daysLeft float64
		stale    bool
	}{{1000, 36 * time.Hour, 10, false}, {800, 30 * time.Minute, 15, true}}
	for _, tc := range cases {
		r := readout(tc.nt, 80, 1, -0.1, 0.1, 1)
		m, _, err := Compute(r, Settings{PlannedUnits: 2000, At: night, Now: night, KeyKind: history.AsOf, MaxStaleness: tc.max}, nil)
		if err != nil {
			t.Fatal(err)
		}
		if m.DaysLeft == nil || math.Abs(*m.DaysLeft-tc.daysLeft) > 1e-12 || m.Alerts.Stale != tc.stale || len(m.Comparisons) != 0 {
			t.Errorf("units %d: days left %v, stale %v, %d sequential comparisons", tc.nt, m.DaysLeft, m.Alerts.Stale, len(m.Comparisons))
		}
		if m.DetectableEffect == nil || *m.DetectableEffect <= 0 {
			t.Errorf("units %d: no detectable effect", tc.nt)
		}
	}
}

func TestParseMethod(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want Method
		ok   bool
	}{{"obf", OBrienFleming, true}, {"Pocock", Pocock, true}, {"mixture", Mixture, true}, {"fixed", Fixed, true}, {"sprt", Fixed, false}} {
		got, err := ParseMethod(tc.in)
		if got != tc.want || (err == nil) != tc.ok {
			t.Errorf("ParseMethod(%q) = %v, %v", tc.in, got, err)
		}
	}
}

// TestNewWarnings stores tonight's warning codes with the look and lists,
// as new_warning changes, the codes the previous look did not have; a
// previous look whose warnings were not recorded (written before history
// schema version 3) gives none.
func TestNewWarnings(t *testing.T) {
	name := func(c experiment.WarningCode) string {
		return map[experiment.WarningCode]string{1: "one", 2: "two", 3: "three"}[c]
	}
	r := readout(1000, 120, 1.4, 0.0, 0.05, 1)
	r.Warnings = []experiment.Warning{{Code: 2}}
	r.Metrics[0].Comparisons[0].Warnings = []experiment.Warning{{Code: 3}, {Code: 1}, {Code: 3}}
	settings := Settings{Default: OBrienFleming, PlannedUnits: 2000, At: night, KeyKind: history.AsOf, Now: night, WarningName: name}
	cases := []struct {
		name     string
		recorded bool
		prev     []string
		want     []string
	}{
		{"previous look had one of them", true, []string{"two"}, []string{"one", "three"}},
		{"previous look had all", true, []string{"one", "three", "two"}, nil},
		{"previous look's warnings unknown", false, nil, nil},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			prev := earlier(0.4, 1, false, 900, 90)
			prev.Warnings, prev.WarningsRecorded = tc.prev, tc.recorded
			m, look, err := Compute(r, settings, []history.Look{prev})
			if err != nil {
				t.Fatal(err)
			}
			if got := look.Warnings; !slices.Equal(got, []string{"one", "three", "two"}) {
				t.Errorf("stored warnings %v, want [one three two]", got)
			}
			var got []string
			for _, c := range m.Changes {
				if c.Kind == "new_warning" {
					got = append(got, c.Details)
				}
			}
			if !slices.Equal(got, tc.want) {
				t.Errorf("new warnings %v, want %v", got, tc.want)
			}
		})
	}
}
