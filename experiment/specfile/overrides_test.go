package specfile

import (
	"errors"
	"reflect"
	"strings"
	"testing"
	"time"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/stats"
)

// Overrides made into an experiment: every value as its flag gives it,
// each check naming the flag.
func TestOverridesApply(t *testing.T) {
	full := Overrides{
		Experiment: "gift-wrap-2027", ExposureEvent: "assigned", Control: "baseline",
		Arms: []string{"baseline", " wrapped "}, Split: "80,20",
		Start: "2027-03-01", End: "2027-03-29", MultiArm: "first", Maturity: "include",
		Metrics:    []string{"buy=order_placed:7d"},
		Guardrails: []string{"refund=refund_requested:14d~0.5pp"},
		Alpha:      0.01, Alternative: "greater", Adjust: "bonferroni", Interval: "clopper-pearson",
		DifferenceInterval: "wald", NonInferiorityMethod: "miettinen-nurminen", MinCount: 10,
		SampleRatioThreshold: 0.0005,
	}
	e := NewSettings()
	if err := full.Apply(e, true); err != nil {
		t.Fatal(err)
	}
	spec, opts, err := e.Build()
	if err != nil {
		t.Fatal(err)
	}
	start, end := time.Date(2027, 3, 1, 0, 0, 0, 0, time.UTC), time.Date(2027, 3, 29, 0, 0, 0, 0, time.UTC)
	want := experiment.Spec{Key: "gift-wrap-2027", ExposureEvent: "assigned", Control: "baseline",
		Arms: []string{"baseline", "wrapped"}, Split: []float64{80, 20}, Start: &start, End: &end,
		MultiArm: experiment.MultiArmFirst, Maturity: experiment.MaturityInclude,
		Metrics: []experiment.Metric{
			{Name: "buy", Events: []string{"order_placed"}, Window: 7 * 24 * time.Hour},
			{Name: "refund", Events: []string{"refund_requested"}, Window: 14 * 24 * time.Hour,
				Guardrail: &experiment.Margin{Value: 0.005}},
		}}
	if !reflect.DeepEqual(spec, want) {
		t.Errorf("spec\n got %+v\nwant %+v", spec, want)
	}
	if opts.Stats.Alpha != 0.01 || opts.Stats.Alternative != stats.Greater || opts.Adjust != stats.Bonferroni ||
		opts.Interval != experiment.IntervalClopperPearson || opts.Difference != experiment.DifferenceWald ||
		opts.NonInferiority != stats.MiettinenNurminen || opts.Stats.MinCount != 10 || opts.SampleRatioThreshold != 0.0005 {
		t.Errorf("options %+v", opts)
	}

	// Over a file's experiment, only the flags given apply.
	e = NewSettings()
	e.SetKey("from-file", Origin{File: "s.toml", Line: 2, Key: "experiment[0].key"})
	e.SetMetrics([]Metric{{Metric: experiment.Metric{Name: "sign", Events: []string{"signup"}}, From: Origin{File: "s.toml", Line: 5}}}, Origin{File: "s.toml", Line: 5})
	partial := full
	partial.Given = func(flag string) bool { return flag == "alpha" || flag == "control" }
	if err := partial.Apply(e, false); err != nil {
		t.Fatal(err)
	}
	spec, opts, err = e.Build()
	if err != nil {
		t.Fatal(err)
	}
	if spec.Key != "from-file" || spec.Control != "baseline" || spec.ExposureEvent != "exposure" ||
		len(spec.Metrics) != 1 || spec.Metrics[0].Name != "sign" || opts.Stats.Alpha != 0.01 || opts.Adjust != stats.Holm {
		t.Errorf("partial overrides: spec %+v, alpha %v, adjust %v", spec, opts.Stats.Alpha, opts.Adjust)
	}
}

func TestOverridesErrors(t *testing.T) {
	for _, tc := range []struct {
		o    Overrides
		want string
	}{
		{Overrides{ExposureEvent: ""}, "--exposure-event and --control must not be empty"},
		{Overrides{ExposureEvent: "x", Control: "c", Arms: []string{"a", "a"}}, `--arms "a,a": empty or repeated arm name`},
		{Overrides{ExposureEvent: "x", Control: "c", Split: "1,x"}, "--split"},
		{Overrides{ExposureEvent: "x", Control: "c", Start: "2027-13-01"}, `--start "2027-13-01"`},
		{Overrides{ExposureEvent: "x", Control: "c", MultiArm: "both"}, "--multi-arm:"},
		{Overrides{ExposureEvent: "x", Control: "c", MultiArm: "exclude", Maturity: "later"}, "--maturity:"},
		{Overrides{ExposureEvent: "x", Control: "c", MultiArm: "exclude", Maturity: "exclude", Metrics: []string{"=x"}}, "--metric:"},
		{Overrides{ExposureEvent: "x", Control: "c", MultiArm: "exclude", Maturity: "exclude", Guardrails: []string{"g=x:7d"}}, "--guardrail:"},
		{Overrides{ExposureEvent: "x", Control: "c", MultiArm: "exclude", Maturity: "exclude", Alpha: 0.7}, "--alpha: 0.7 is not strictly between 0 and 0.5"},
	} {
		err := tc.o.Apply(NewSettings(), true)
		var fe *FlagError
		if !errors.As(err, &fe) || !strings.HasPrefix(err.Error(), tc.want) {
			t.Errorf("%+v: error %v, want a FlagError starting %q", tc.o, err, tc.want)
		}
	}
}

// TestOverridesShape checks --input-shape and the metrics of a table: with
// a unit table, --metric NAME=COLUMN names the metric's column; a spec
// file's metrics are checked against a shape the flag changes, and the
// error names the file, line and key.
func TestOverridesShape(t *testing.T) {
	const units = "[input]\nshape = \"units\"\n\n[[experiment]]\nkey = \"k\"\n\n[[experiment.metric]]\nname = \"booked\"\ncolumn = \"booked_flag\"\n"
	const events = "[[experiment]]\nkey = \"k\"\n\n[[experiment.metric]]\nname = \"booked\"\nevents = [\"booking_confirmed\"]\n"
	given := func(flags ...string) func(string) bool {
		return func(f string) bool { return strings.Contains(" "+strings.Join(flags, " ")+" ", " "+f+" ") }
	}
	cases := []struct {
		name, file string
		o          Overrides
		columns    []string // the metrics' columns, or
		err        string   // the error
	}{
		{"file's column", units, Overrides{}, []string{"booked_flag"}, ""},
		{"flag's column over the file's", units, Overrides{Given: given("metric"), Metrics: []string{"booked=b2:3d", "paid"}}, []string{"b2", "paid"}, ""},
		{"file's events, flag's units", events, Overrides{Given: given("input-shape"), Shape: "units"}, nil,
			`s.toml:5: experiment[0].metric[0].name: metric "booked" lists events (booking_confirmed), which only an event log has; the input is a unit table (input shape "units", from --input-shape)`},
		{"file's column, flag's events", units, Overrides{Given: given("input-shape"), Shape: "events"}, nil,
			`s.toml:8: experiment[0].metric[0].name: metric "booked" has no events, and the input is an event log (input shape "events", from --input-shape)`},
		{"file's column, flag's counts", units, Overrides{Given: given("input-shape"), Shape: "counts"}, nil,
			`metric "booked" names a column (booked_flag), which only a unit table has; the input shape is "counts" (from --input-shape)`},
		{"unknown shape", events, Overrides{Given: given("input-shape"), Shape: "rows"}, nil, `--input-shape "rows": want events, units or counts`},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			sf, err := Parse("s.toml", []byte(tc.file))
			if err != nil {
				t.Fatal(err)
			}
			e := sf.Experiments[0]
			err = tc.o.Apply(e, false)
			if err == nil {
				_, _, err = e.Build()
			}
			if tc.err != "" {
				if err == nil || !strings.Contains(err.Error(), tc.err) {
					t.Errorf("error %v, want %q", err, tc.err)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			var cols []string
			for _, c := range e.MetricColumns() {
				cols = append(cols, c.Physical)
			}
			if !reflect.DeepEqual(cols, tc.columns) {
				t.Errorf("columns %q, want %q", cols, tc.columns)
			}
		})
	}
}
