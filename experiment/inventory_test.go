package experiment

import (
	"reflect"
	"testing"
	"time"
)

// TestOSADistance checks the optimal string alignment distance on worked
// examples.
func TestOSADistance(t *testing.T) {
	cases := []struct {
		a, b string
		want int
	}{
		// The usual Levenshtein example: k->s, e->i, insert g (from
		// memory; no swap helps, so OSA gives the same 3).
		{"kitten", "sitting", 3},
		// "ca" to "abc": OSA cannot edit the swapped pair again, so 3,
		// where the unrestricted Damerau-Levenshtein distance is 2 (from
		// memory, the usual example of the difference).
		{"ca", "abc", 3},
		// One swap of neighbours (hand count).
		{"purchsae", "purchase", 1},
		// Insert a, delete the last s (hand count: purch|ses vs
		// purch|ase).
		{"purchses", "purchase", 2},
		{"", "abc", 3},
		{"same", "same", 0},
		// Runes, not bytes: one substitution (hand count).
		{"café", "cafe", 1},
	}
	for _, tc := range cases {
		if got := osaDistance([]rune(tc.a), []rune(tc.b)); got != tc.want {
			t.Errorf("osaDistance(%q, %q) = %d, want %d", tc.a, tc.b, got, tc.want)
		}
		if got := osaDistance([]rune(tc.b), []rune(tc.a)); got != tc.want {
			t.Errorf("osaDistance(%q, %q) = %d, want %d (symmetric)", tc.b, tc.a, got, tc.want)
		}
	}
}

// TestClosest checks the "did you mean" choice: case, then edit distance
// within a quarter of the length, then a prefix (common practice).
func TestClosest(t *testing.T) {
	events := []string{"search", "add_to_cart", "page_view", "exposure", "purchase", "newsletter_signup"}
	cases := []struct {
		name string
		held []string
		want string
	}{
		{"purchses", events, "purchase"},
		{"Purchase", events, "purchase"},
		{"refund", events, ""},
		{"purchase", events, ""}, // the name itself is not a suggestion
		{"checkout-flow", []string{"checkout-flow-2026", "search-ranking"}, "checkout-flow-2026"},
		{"checkout-flow-2026-b", []string{"checkout-flow-2026", "checkout-flow"}, "checkout-flow-2026"},
		// 2 edits allowed from 8 characters on, 1 below.
		{"exposd", events, ""}, // distance 3 (d->u, insert r, e) > 1; "expos" is no whole prefix
		{"exposre", events, "exposure"},
		// Names shorter than three characters get no distance match.
		{"b", []string{"a", "c"}, ""},
		{"ab", []string{"ba"}, ""},
		{"", events, ""},
		// Ties go to the earlier held name.
		{"cat", []string{"bat", "hat"}, "bat"},
	}
	for _, tc := range cases {
		if got := Closest(tc.name, tc.held); got != tc.want {
			t.Errorf("Closest(%q, %q) = %q, want %q", tc.name, tc.held, got, tc.want)
		}
	}
}

// TestMetricEventRows counts the rows of each metric event by hand: every
// valid row of the event, in or out of the window, of exposed units or
// not; and the keys of a key-less spec.
func TestMetricEventRows(t *testing.T) {
	end := base.Add(10 * time.Hour)
	spec := Spec{ExposureEvent: "exposure", Control: "a", End: &end, Metrics: []Metric{
		{Name: "buy", Events: []string{"purchase", "refund"}},
		{Name: "again", Events: []string{"purchase"}},
	}}
	rows := []row{
		{user: "u1", at: time.Hour, event: "exposure", exp: "x", arm: "a"},
		{user: "u1", at: 2 * time.Hour, event: "purchase"},
		{user: "u2", at: 2 * time.Hour, event: "purchase"},  // never exposed
		{user: "u1", at: 11 * time.Hour, event: "purchase"}, // after the window
		{user: "u3", at: time.Hour, event: "exposure", exp: "y", arm: "b"},
		{user: "u3", at: time.Hour, event: "page_view"},
	}
	tl := tallier(t, spec, rows, 2)
	want := []NameCount{{"purchase", 3}, {"refund", 0}}
	if got := tl.MetricEventRows(); !reflect.DeepEqual(got, want) {
		t.Errorf("MetricEventRows = %v, want %v", got, want)
	}
	if got := tl.ExperimentKeys(); !reflect.DeepEqual(got, []string{"x", "y"}) {
		t.Errorf("ExperimentKeys = %q, want [x y]", got)
	}
	spec.Key = "x"
	if got := tallier(t, spec, rows, 0).ExperimentKeys(); got != nil {
		t.Errorf("ExperimentKeys with a key = %q, want nil", got)
	}
}

// TestArmsWithUnits lists the arms with exposed units, or units for a
// counts table, in tally order.
func TestArmsWithUnits(t *testing.T) {
	tl := Tally{Arms: []ArmTally{{Name: "a", Exposed: 3, Units: 2}, {Name: "b"}, {Name: "c", Units: 4}}}
	want := []NameCount{{"a", 3}, {"c", 4}}
	if got := ArmsWithUnits(tl); !reflect.DeepEqual(got, want) {
		t.Errorf("ArmsWithUnits = %v, want %v", got, want)
	}
}
