package experiment

import (
	"reflect"
	"slices"
	"testing"
	"time"
)

// A reader that leaves out the rows of events the tallier does not use
// (Events) and reports them through AddFiltered must give the tally of the
// whole log, diagnostics and maturity included. The log's last rows are
// of an unused event: they alone set the freshness, which is the maturity
// horizon of a spec without an end, so a wrong AddFiltered changes the
// immature counts.
func TestAddFilteredEqualsWholeLog(t *testing.T) {
	spec := spec2()
	spec.End = nil
	spec.Maturity = MaturityExclude
	spec.Metrics = append(spec.Metrics, Metric{Name: "return", Events: []string{"visit", "buy"}, Window: 48 * hour})
	rows := []row{
		seen("a", 0, "control"),
		seen("b", hour, "treat"),
		ev("a", 2*hour, "view"),
		ev("a", 3*hour, "buy"),
		seen("c", 20*hour, "treat"),
		ev("b", 21*hour, "visit"),
		ev("c", 22*hour, "scroll"),
		seen("d", 40*hour, "control"),
		ev("d", 41*hour, "buy"),
		ev("x", 60*hour, "view"),
		ev("y", 70*hour, "scroll"), // the freshness
	}
	tl, err := NewTallier(spec)
	if err != nil {
		t.Fatal(err)
	}
	events := tl.Events()
	if want := []string{"seen", "buy", "visit"}; !slices.Equal(events, want) {
		t.Fatalf("Events() = %v, want %v", events, want)
	}
	var kept []row
	var filtered, maxTS int64
	for _, r := range rows {
		if slices.Contains(events, r.event) {
			kept = append(kept, r)
			continue
		}
		filtered++
		maxTS = max(maxTS, base.Add(r.at).UnixNano())
	}
	whole := tally(t, spec, rows, 3)
	part := tallier(t, spec, kept, 3)
	part.AddFiltered(filtered, maxTS)
	got, err := part.Tally()
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(got, whole) {
		t.Errorf("filtered tally\n%+v\nwhole log\n%+v", got, whole)
	}
	// The case must exercise maturity and the filtered freshness. By hand:
	// with the horizon at 70h, a unit is immature for buy (24h) when its
	// t0 is after 46h (none) and for return (48h) after 22h (d, t0 40h).
	// Without the filtered rows the horizon would be 41h: c and d would be
	// immature for buy, and every unit for return.
	if whole.Diag.NotMetricEvents != 4 || whole.Freshness != base.Add(70*time.Hour).UnixNano() {
		t.Fatalf("the log does not exercise the filter: %+v", whole.Diag)
	}
	var buy, ret int64
	for _, a := range whole.Arms {
		buy += a.Metrics[0].Immature
		ret += a.Metrics[1].Immature
	}
	if buy != 0 || ret != 1 {
		t.Errorf("immature units: buy %d, return %d; want 0 and 1 (d)", buy, ret)
	}
}
