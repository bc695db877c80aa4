package specfile

import (
	"errors"
	"reflect"
	"testing"
	"time"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/ingest"
)

// TestBuildErrors checks that a setter or Build reports a problem against
// the setting that came last to it, as a *FlagError for a flag or a
// default and as an *Error for a file key, in the words of the help text.
func TestBuildErrors(t *testing.T) {
	flag := func(name string) Origin { return Origin{Flag: "--" + name} }
	file := func(line int, key string) Origin { return Origin{File: "s.toml", Line: line, Key: key} }
	purchase := []Metric{{Metric: experiment.Metric{Name: "purchase", Events: []string{"purchase"}}, From: flag("metric")}}
	day := func(d int) *time.Time { t := time.Date(2027, 3, d, 0, 0, 0, 0, time.UTC); return &t }
	cases := []struct {
		name string
		set  func(e *Settings) error
		flag bool
		want string
	}{
		{"no metrics", func(e *Settings) error { return nil }, true,
			"name at least one metric with --metric NAME=EVENT[:WINDOW], for example --metric purchase=purchase:7d"},
		{"split without arms", func(e *Settings) error { e.SetSplit([]float64{1, 1}, flag("split")); return nil }, true,
			"--split needs --arms to say which arm each share belongs to"},
		{"split without arms in a file", func(e *Settings) error { e.SetSplit([]float64{1, 1}, file(4, "experiment[0].split")); return nil }, false,
			"s.toml:4: experiment[0].split: a split needs the arms it belongs to (arms = [...])"},
		{"shares for other arms", func(e *Settings) error {
			e.SetArms([]string{"a", "b"}, true, flag("arms"))
			e.SetSplit([]float64{1, 1}, file(4, "experiment[0].split"))
			return nil
		}, false, "s.toml:4: experiment[0].split: 2 shares for 3 arms (control, a, b, from --arms)"},
		{"control outside the file's arms", func(e *Settings) error {
			e.SetArms([]string{"a", "b"}, false, file(3, "experiment[0].arms"))
			return e.SetControl("phone", flag("control"))
		}, false, `s.toml:3: experiment[0].arms: the control "phone" (--control) is not among the arms (a, b)`},
		{"end before start", func(e *Settings) error {
			e.SetStart(day(9), file(5, "experiment[0].start"))
			e.SetEnd(day(2), flag("end"))
			return nil
		}, true, "--end: the window ends at 2027-03-02T00:00:00Z, not after its start 2027-03-09T00:00:00Z (s.toml:5: experiment[0].start)"},
		{"min count", func(e *Settings) error { return e.SetMinCount(0, flag("min-count")) }, true, "--min-count: 0: must be at least 1"},
		{"empty control in a file", func(e *Settings) error { return e.SetControl("", file(6, "experiment[0].control")) }, false,
			"s.toml:6: experiment[0].control: must not be empty"},
		{"alpha", func(e *Settings) error { return e.SetAlpha(0.5, flag("alpha")) }, true, "--alpha: 0.5 is not strictly between 0 and 0.5"},
	}
	for _, tc := range cases {
		e := NewSettings()
		if tc.name != "no metrics" {
			e.SetMetrics(purchase, flag("metric"))
		}
		err := tc.set(e)
		if err == nil {
			_, _, err = e.Build()
		}
		var fe *FlagError
		var se *Error
		switch {
		case err == nil:
			t.Errorf("%s: no error, want %q", tc.name, tc.want)
		case err.Error() != tc.want:
			t.Errorf("%s:\n got  %q\n want %q", tc.name, err, tc.want)
		case tc.flag && !errors.As(err, &fe), !tc.flag && !errors.As(err, &se):
			t.Errorf("%s: error of type %T", tc.name, err)
		}
	}
}

// TestSettingsMetrics checks the order of the metrics Build returns
// (primary ones first), --lower-is-better marking and a unit table's
// metric columns.
func TestSettingsMetrics(t *testing.T) {
	// A unit table: metrics have columns, not events.
	e := NewSettings()
	e.SetShape(experiment.InputUnitTable, Origin{Flag: "--input-shape"})
	m := func(name string) experiment.Metric { return experiment.Metric{Name: name} }
	refund := m("refund")
	refund.Guardrail = &experiment.Margin{Value: 0.01}
	e.SetMetrics([]Metric{
		{Metric: m("signup"), Role: Secondary},
		{Metric: refund, Role: Guardrail},
		{Metric: m("purchase"), Role: Primary, Column: "purchased_flag"},
	}, Origin{Flag: "--metric"})
	if !e.MarkLowerIsBetter("refund") || e.MarkLowerIsBetter("churn") {
		t.Errorf("MarkLowerIsBetter found the wrong metrics")
	}
	spec, _, err := e.Build()
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, mt := range spec.Metrics {
		names = append(names, mt.Name)
	}
	if want := []string{"purchase", "signup", "refund"}; !reflect.DeepEqual(names, want) {
		t.Errorf("metrics %q, want %q", names, want)
	}
	if !spec.Metrics[2].LowerIsBetter || spec.Metrics[0].LowerIsBetter {
		t.Errorf("lower is better: %+v", spec.Metrics)
	}
	want := []ingest.ColumnMap{{Logical: "signup", Physical: "signup"}, {Logical: "refund", Physical: "refund"},
		{Logical: "purchase", Physical: "purchased_flag"}}
	if got := e.MetricColumns(); !reflect.DeepEqual(got, want) {
		t.Errorf("MetricColumns = %+v, want %+v", got, want)
	}
	if Primary.String() != "primary" || Guardrail.String() != "guardrail" || Role(7).String() != "Role(7)" {
		t.Errorf("role names: %s, %s, %s", Primary, Guardrail, Role(7))
	}
}
