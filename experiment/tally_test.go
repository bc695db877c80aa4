package experiment

import (
	"fmt"
	"math/rand/v2"
	"reflect"
	"strings"
	"testing"
	"time"
	"unsafe"
)

// counters projects the tally's diagnostics onto plain numbers so that a
// test states every one of them.
type counters struct {
	Rows, Exposure, ExposureOutside, OtherExperiment, NotMetric int64
	Metric, AfterEnd, NeverExposed, Excluded, Before, InUnit    int64
	OutsideAttribution                                          []int64
	UnitsExposed, MultiArm, Tied                                int64
}

func project(d TallyDiagnostics) counters {
	return counters{
		Rows: d.RowsRead, Exposure: d.ExposureRows, ExposureOutside: d.ExposuresOutsideWindow,
		OtherExperiment: d.OtherExperimentRows, NotMetric: d.NotMetricEvents,
		Metric: d.MetricEvents, AfterEnd: d.AfterWindowEnd, NeverExposed: d.UnitNeverExposed,
		Excluded: d.UnitExcluded, Before: d.BeforeExposure, InUnit: d.MetricEventsInUnit,
		OutsideAttribution: d.OutsideAttribution,
		UnitsExposed:       d.UnitsExposed, MultiArm: d.MultiArmUnits, Tied: d.TiedUnits,
	}
}

// armWant is one arm's expected analysis population and per-metric counts.
type armWant struct {
	name   string
	units  int64
	counts []Count
}

// spec2 is the spec the hand-made logs share unless a case changes it: two
// arms, one metric "buy" with a 24-hour attribution window, and the
// analysis window [base, base+10d).
func spec2() Spec {
	return Spec{
		Key:           "exp",
		ExposureEvent: "seen",
		Control:       "control",
		Arms:          []string{"control", "treat"},
		Start:         ptrTime(base),
		End:           ptrTime(base.Add(10 * day)),
		Metrics:       []Metric{{Name: "buy", Events: []string{"buy"}, Window: 24 * hour}},
	}
}

func seen(user string, at time.Duration, arm string) row {
	return row{user: user, at: at, event: "seen", exp: "exp", arm: arm}
}

func ev(user string, at time.Duration, event string) row {
	return row{user: user, at: at, event: event}
}

// TestEventSemantics checks the event semantics of experiment/DESIGN.md on
// small logs whose answers are worked out by hand in the comments. Each log
// is run in one batch and one row per batch: batching must not change
// anything.
func TestEventSemantics(t *testing.T) {
	cases := []struct {
		name  string
		spec  func(*Spec)
		rows  []row
		arms  []armWant
		diag  counters
		check func(*testing.T, Tally)
	}{
		{
			// t0 <= ts: an event at the very instant of exposure converts.
			name: "conversion exactly at t0",
			rows: []row{
				seen("u1", 1*hour, "control"),
				ev("u1", 1*hour, "buy"),
				seen("u2", 1*hour, "treat"),
			},
			arms: []armWant{
				{"control", 1, []Count{{Units: 1, Conversions: 1}}},
				{"treat", 1, []Count{{Units: 1}}},
			},
			diag: counters{Rows: 3, Exposure: 2, Metric: 1, InUnit: 1, OutsideAttribution: []int64{0}, UnitsExposed: 2},
		},
		{
			// ts < t0 + W: u1's event at exactly t0 + 24h is outside the
			// window; u2's one nanosecond earlier is inside.
			name: "conversion exactly at t0 + window",
			rows: []row{
				seen("u1", 2*hour, "treat"),
				ev("u1", 26*hour, "buy"),
				seen("u2", 2*hour, "treat"),
				ev("u2", 26*hour-time.Nanosecond, "buy"),
			},
			arms: []armWant{
				{"control", 0, []Count{{}}},
				{"treat", 2, []Count{{Units: 2, Conversions: 1}}},
			},
			diag: counters{Rows: 4, Exposure: 2, Metric: 2, InUnit: 2, OutsideAttribution: []int64{1}, UnitsExposed: 2},
		},
		{
			// The purchase at 1h precedes u1's exposure at 3h: ignored and
			// counted as before_exposure. The file lists the exposure
			// first, so reading order does not decide.
			name: "conversion before exposure",
			rows: []row{
				seen("u1", 3*hour, "control"),
				ev("u1", 1*hour, "buy"),
			},
			arms: []armWant{
				{"control", 1, []Count{{Units: 1}}},
				{"treat", 0, []Count{{}}},
			},
			diag: counters{Rows: 2, Exposure: 1, Metric: 1, Before: 1, OutsideAttribution: []int64{0}, UnitsExposed: 1},
		},
		{
			// Maturity against end = 10d: u1 (t0 = 10d-12h) has
			// t0 + W = 10d+12h > end, immature and left out. u2 (t0 = 9d)
			// has t0 + W = end exactly: mature; its purchase 1ns before the
			// end converts.
			name: "immature unit excluded",
			rows: []row{
				seen("u1", 10*day-12*hour, "control"),
				ev("u1", 10*day-6*hour, "buy"),
				seen("u2", 9*day, "control"),
				ev("u2", 10*day-time.Nanosecond, "buy"),
			},
			arms: []armWant{
				{"control", 2, []Count{{Units: 1, Conversions: 1, Immature: 1}}},
				{"treat", 0, []Count{{}}},
			},
			diag: counters{Rows: 4, Exposure: 2, Metric: 2, InUnit: 2, OutsideAttribution: []int64{0}, UnitsExposed: 2},
		},
		{
			// The same log under the include policy keeps u1, whose
			// purchase falls inside its (unfinished) window.
			name: "immature unit included",
			spec: func(s *Spec) { s.Maturity = MaturityInclude },
			rows: []row{
				seen("u1", 10*day-12*hour, "control"),
				ev("u1", 10*day-6*hour, "buy"),
				seen("u2", 9*day, "control"),
				ev("u2", 10*day-time.Nanosecond, "buy"),
			},
			arms: []armWant{
				{"control", 2, []Count{{Units: 2, Conversions: 2, Immature: 1}}},
				{"treat", 0, []Count{{}}},
			},
			diag: counters{Rows: 4, Exposure: 2, Metric: 2, InUnit: 2, OutsideAttribution: []int64{0}, UnitsExposed: 2},
		},
		{
			// u1 buys but never sees the experiment: counted as
			// unit_never_exposed, in no arm. u2 is an ordinary control unit.
			name: "unit never exposed",
			rows: []row{
				ev("u1", 1*hour, "buy"),
				seen("u2", 0, "control"),
			},
			arms: []armWant{
				{"control", 1, []Count{{Units: 1}}},
				{"treat", 0, []Count{{}}},
			},
			diag: counters{Rows: 2, Exposure: 1, Metric: 1, NeverExposed: 1, OutsideAttribution: []int64{0}, UnitsExposed: 1},
		},
		{
			// u1 is exposed to both arms at the same instant. Under the
			// default exclude policy it is a multi-arm unit (not counted as
			// tied: ties only matter under first) and its purchase is
			// ignored as unit_excluded. u2 sees treat then control: also
			// multi-arm, also excluded.
			name: "tie at t0 under exclude",
			rows: []row{
				seen("u1", 5*hour, "control"),
				seen("u1", 5*hour, "treat"),
				ev("u1", 6*hour, "buy"),
				seen("u2", 4*hour, "treat"),
				seen("u2", 5*hour, "control"),
				ev("u2", 6*hour, "buy"),
			},
			arms: []armWant{
				{"control", 0, []Count{{}}},
				{"treat", 0, []Count{{}}},
			},
			diag: counters{Rows: 6, Exposure: 4, Metric: 2, Excluded: 2, OutsideAttribution: []int64{0}, UnitsExposed: 2, MultiArm: 2},
		},
		{
			// Under first, u1 has no first arm (tie at t0): excluded and
			// counted as tied. u2's first exposure (4h) is in treat: it
			// stays there and its purchase at 6h converts.
			name: "tie at t0 under first",
			spec: func(s *Spec) { s.MultiArm = MultiArmFirst },
			rows: []row{
				seen("u1", 5*hour, "treat"),
				seen("u1", 5*hour, "control"),
				ev("u1", 6*hour, "buy"),
				seen("u2", 5*hour, "control"),
				seen("u2", 4*hour, "treat"),
				ev("u2", 6*hour, "buy"),
			},
			arms: []armWant{
				{"control", 0, []Count{{}}},
				{"treat", 1, []Count{{Units: 1, Conversions: 1}}},
			},
			diag: counters{Rows: 6, Exposure: 4, Metric: 2, Excluded: 1, InUnit: 1, OutsideAttribution: []int64{0}, UnitsExposed: 2, MultiArm: 2, Tied: 1},
		},
		{
			// No end: the window is unbounded and maturity is judged against
			// the freshness F = 100h, the latest ts in the file, which is
			// u1's purchase. With an unlimited window it converts. With a
			// 24h window u1's purchase is outside (t0 + W = 24h <= F, so u1
			// is mature), and u2 (t0 = 90h, t0 + W = 114h > F) is immature.
			name: "event at exactly the latest timestamp",
			spec: func(s *Spec) {
				s.End = nil
				s.Metrics = []Metric{
					{Name: "buy_any", Events: []string{"buy"}},
					{Name: "buy_1d", Events: []string{"buy"}, Window: 24 * hour},
				}
			},
			rows: []row{
				seen("u1", 0, "control"),
				ev("u1", 100*hour, "buy"),
				seen("u2", 90*hour, "treat"),
				ev("u2", 95*hour, "browse"),
			},
			arms: []armWant{
				{"control", 1, []Count{{Units: 1, Conversions: 1}, {Units: 1}}},
				{"treat", 1, []Count{{Units: 1}, {Immature: 1}}},
			},
			diag: counters{Rows: 4, Exposure: 2, NotMetric: 1, Metric: 1, InUnit: 1, OutsideAttribution: []int64{0, 1}, UnitsExposed: 2},
			check: func(t *testing.T, tl Tally) {
				if want := base.Add(100 * hour).UnixNano(); !tl.HasFreshness || tl.Freshness != want {
					t.Errorf("freshness = %d (%v), want %d", tl.Freshness, tl.HasFreshness, want)
				}
			},
		},
		{
			// The window is [1h, 10d). u1's purchase at exactly 10d is at
			// the end: ignored. u2's exposure at exactly 10d and u3's at 0h
			// are outside the window, so neither is a unit.
			name: "window bounds",
			spec: func(s *Spec) {
				s.Start = ptrTime(base.Add(hour))
				s.Metrics[0].Window = 0
			},
			rows: []row{
				seen("u1", 2*hour, "control"),
				ev("u1", 10*day, "buy"),
				seen("u2", 10*day, "treat"),
				seen("u3", 0, "treat"),
			},
			arms: []armWant{
				{"control", 1, []Count{{Units: 1}}},
				{"treat", 0, []Count{{}}},
			},
			diag: counters{Rows: 4, Exposure: 3, ExposureOutside: 2, Metric: 1, AfterEnd: 1, OutsideAttribution: []int64{0}, UnitsExposed: 1},
		},
		{
			// Another experiment's exposure does not expose u1 here; three
			// purchases by u2 are one converted unit.
			name: "other experiment and repeat conversions",
			rows: []row{
				{user: "u1", at: hour, event: "seen", exp: "other", arm: "control"},
				ev("u1", 2*hour, "buy"),
				seen("u2", hour, "treat"),
				ev("u2", 2*hour, "buy"),
				ev("u2", 3*hour, "buy"),
				ev("u2", 4*hour, "buy"),
			},
			arms: []armWant{
				{"control", 0, []Count{{}}},
				{"treat", 1, []Count{{Units: 1, Conversions: 1}}},
			},
			diag: counters{Rows: 6, Exposure: 1, OtherExperiment: 1, Metric: 4, NeverExposed: 1, InUnit: 3, OutsideAttribution: []int64{0}, UnitsExposed: 1},
		},
		{
			// Two exposures of another experiment in one batch: neither
			// exposes its unit, whether the experiment column is utf8 or
			// dictionary-encoded (a value decided once per batch).
			name: "other experiment twice",
			rows: []row{
				{user: "u1", at: hour, event: "seen", exp: "other", arm: "control"},
				{user: "u3", at: 2 * hour, event: "seen", exp: "other", arm: "treat"},
				seen("u2", hour, "treat"),
				ev("u2", 2*hour, "buy"),
				ev("u1", 3*hour, "buy"),
			},
			arms: []armWant{
				{"control", 0, []Count{{}}},
				{"treat", 1, []Count{{Units: 1, Conversions: 1}}},
			},
			diag: counters{Rows: 5, Exposure: 1, OtherExperiment: 2, Metric: 2, NeverExposed: 1, InUnit: 1, OutsideAttribution: []int64{0}, UnitsExposed: 1},
		},
	}
	for _, tc := range cases {
		for _, size := range []int{0, 1} {
			spec := spec2()
			if tc.spec != nil {
				tc.spec(&spec)
			}
			got := tally(t, spec, tc.rows, size)
			name := tc.name
			if size == 1 {
				name += "/one row per batch"
			}
			var arms []armWant
			for _, a := range got.Arms {
				arms = append(arms, armWant{a.Name, a.Units, a.Metrics})
			}
			if !reflect.DeepEqual(arms, tc.arms) {
				t.Errorf("%s: arms = %+v, want %+v", name, arms, tc.arms)
			}
			if d := project(got.Diag); !reflect.DeepEqual(d, tc.diag) {
				t.Errorf("%s: diagnostics = %+v, want %+v", name, d, tc.diag)
			}
			checkAccounting(t, name, got.Diag)
			if tc.check != nil {
				tc.check(t, got)
			}
		}
	}
}

// checkAccounting checks that every row is counted exactly once.
func checkAccounting(t *testing.T, name string, d TallyDiagnostics) {
	t.Helper()
	if got := d.NotMetricEvents + d.ExposureRows + d.OtherExperimentRows + d.MetricEvents; got != d.RowsRead {
		t.Errorf("%s: rows by role sum to %d, read %d", name, got, d.RowsRead)
	}
	if got := d.AfterWindowEnd + d.UnitNeverExposed + d.UnitExcluded + d.BeforeExposure + d.MetricEventsInUnit; got != d.MetricEvents {
		t.Errorf("%s: metric events by fate sum to %d, want %d", name, got, d.MetricEvents)
	}
}

// TestArmOrder checks that arms follow the spec, then first exposure, then
// name.
func TestArmOrder(t *testing.T) {
	spec := spec2()
	spec.Arms = []string{"treat"}
	rows := []row{
		seen("u1", 3*hour, "zeta"),
		seen("u2", 2*hour, "control"),
		seen("u3", 3*hour, "alpha"),
		seen("u4", 5*hour, "treat"),
	}
	got := tally(t, spec, rows, 0)
	var names []string
	for _, a := range got.Arms {
		names = append(names, a.Name)
	}
	want := []string{"treat", "control", "alpha", "zeta"}
	if !reflect.DeepEqual(names, want) {
		t.Errorf("arm order = %v, want %v", names, want)
	}
}

func TestTallierErrors(t *testing.T) {
	cases := []struct {
		name string
		spec func(*Spec)
		want string
	}{
		{"no exposure event", func(s *Spec) { s.ExposureEvent = "" }, "no exposure event"},
		{"no metrics", func(s *Spec) { s.Metrics = nil }, "no metrics"},
		{"window backwards", func(s *Spec) { s.Start, s.End = s.End, s.Start }, "is not before end"},
		{"split length", func(s *Spec) { s.Split = []float64{1} }, "1 shares for 2 arms"},
		{"metric counts exposure", func(s *Spec) { s.Metrics[0].Events = []string{"seen"} }, "counts the exposure event"},
		{"duplicate metric", func(s *Spec) { s.Metrics = append(s.Metrics, s.Metrics[0]) }, "defined twice"},
		{"negative window", func(s *Spec) { s.Metrics[0].Window = -time.Hour }, "negative window"},
		{"target out of range", func(s *Spec) { one := 1.0; s.Metrics[0].Target = &one }, "not strictly between 0 and 1"},
		{"duplicate arm", func(s *Spec) { s.Arms = []string{"a", "a"} }, "listed twice"},
	}
	for _, tc := range cases {
		spec := spec2()
		tc.spec(&spec)
		_, err := NewTallier(spec)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: error = %v, want it to contain %q", tc.name, err, tc.want)
		}
	}
}

// TestAmbiguousExperiment checks that a run without an experiment key
// refuses a log with exposures of two experiments.
func TestAmbiguousExperiment(t *testing.T) {
	spec := spec2()
	spec.Key = ""
	tl, err := NewTallier(spec)
	if err != nil {
		t.Fatal(err)
	}
	rec := batch(t, []row{
		{user: "u1", at: hour, event: "seen", exp: "a", arm: "control"},
		{user: "u2", at: hour, event: "seen", exp: "b", arm: "control"},
	})
	defer rec.Release()
	if err := tl.Add(rec); err != nil {
		t.Fatal(err)
	}
	if _, err := tl.Tally(); err == nil || !strings.Contains(err.Error(), "2 experiment keys (a, b)") {
		t.Errorf("error = %v, want one naming both keys", err)
	}
}

// TestUnitStatePacking checks the 16-byte per-unit exposure state: its
// size, and that the first arm (up to the largest index maxArms allows)
// and the tie and multi-arm flags are kept apart in its packed word
// (common practice: a round trip of every field against the others).
func TestUnitStatePacking(t *testing.T) {
	if n := unsafe.Sizeof(unitState{}); n != 16 {
		t.Fatalf("unitState is %d bytes, want 16", n)
	}
	for _, arm := range []int32{-1, 0, 1, 7, maxArms - 1} {
		for _, tied := range []bool{false, true} {
			for _, multi := range []bool{false, true} {
				s := unitState{armAtT0: -1}
				if arm >= 0 {
					s.first |= uint32(arm) + 1
				}
				s.setTied(true)
				s.setTied(tied)
				if multi {
					s.first |= stateMulti
				}
				if s.firstArm() != arm || s.tied() != tied || s.multi() != multi {
					t.Errorf("arm %d tied %v multi %v: read back arm %d tied %v multi %v", arm, tied, multi, s.firstArm(), s.tied(), s.multi())
				}
			}
		}
	}
}

// TestTallySumsAsRecords checks Tally's per-arm sums for a spec without
// segments (Tallier.sumPart) against the general route: every record of
// Units added to an Accumulator one by one. The random logs hold
// multi-arm units, ties at t0, units exposed late in the window (immature)
// and arms the spec does not list; the specs cover both multi-arm
// policies, both maturity policies, a metric without a window and a spec
// without an end (the horizon is then the data's freshness). The expected
// values are the general route's (common practice: two routes to one sum).
func TestTallySumsAsRecords(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	arms := []string{"control", "treat", "zeta"}
	var rows []row
	for u := range 800 {
		user := fmt.Sprintf("u%03d", u)
		at := time.Duration(rng.IntN(240)) * hour
		for k := range 1 + rng.IntN(3) {
			arm := arms[rng.IntN(3)]
			if k > 0 && rng.IntN(2) == 0 {
				rows = append(rows, seen(user, at, arm)) // a tie when the arm differs
				continue
			}
			rows = append(rows, seen(user, at+time.Duration(rng.IntN(48))*hour, arm))
		}
		for range rng.IntN(4) {
			rows = append(rows, ev(user, time.Duration(rng.IntN(280))*hour, []string{"buy", "view", "other"}[rng.IntN(3)]))
		}
	}
	for _, multi := range []MultiArmPolicy{MultiArmExclude, MultiArmFirst} {
		for _, maturity := range []MaturityPolicy{MaturityExclude, MaturityInclude} {
			for _, noEnd := range []bool{false, true} {
				spec := spec2()
				spec.Arms = []string{"control", "treat"}
				spec.MultiArm, spec.Maturity = multi, maturity
				spec.Metrics = []Metric{
					{Name: "buy", Events: []string{"buy"}, Window: 24 * hour},
					{Name: "any", Events: []string{"buy", "view"}},
					{Name: "view", Events: []string{"view"}, Window: 72 * hour},
				}
				if noEnd {
					spec.End = nil
				}
				name := fmt.Sprintf("%v/%v/no end %v", multi, maturity, noEnd)
				tl := tallier(t, spec, rows, 97)
				got, err := tl.Tally()
				if err != nil {
					t.Fatal(err)
				}
				seq, err := tl.Units()
				if err != nil {
					t.Fatal(err)
				}
				acc, err := NewAccumulator(spec)
				if err != nil {
					t.Fatal(err)
				}
				for _, pt := range tl.parts {
					pt.seeArms(acc)
				}
				for rec := range seq {
					if err := acc.Add(rec); err != nil {
						t.Fatal(err)
					}
				}
				want := acc.Tally()
				if !reflect.DeepEqual(got.Arms, want.Arms) {
					t.Errorf("%s: Tally's arms\n%+v\nthe records'\n%+v", name, got.Arms, want.Arms)
				}
				if g, w := got.Diag, want.Diag; g.UnitsExposed != w.UnitsExposed || g.MultiArmUnits != w.MultiArmUnits || g.TiedUnits != w.TiedUnits {
					t.Errorf("%s: Tally's unit counters %+v, the records' %+v", name, g, w)
				}
				var immature int64
				for _, a := range want.Arms {
					immature += a.Metrics[0].Immature
				}
				if (multi == MultiArmFirst) != (want.Diag.TiedUnits > 0) || want.Diag.MultiArmUnits == 0 || len(want.Arms) != 3 || immature == 0 {
					t.Errorf("%s: the log does not exercise the sums: %+v", name, want)
				}
			}
		}
	}
}
