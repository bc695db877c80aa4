package specfile

import (
	"errors"
	"strings"
	"testing"
)

// TestFlagValueRanges checks that each flag value outside the range the
// analysis can handle is refused where it is parsed, with the flag's name
// and the allowed range. The ranges are armtally's documented limits; the
// reasons behind them are IEEE 754 double facts: 1 - 1e-17 rounds to
// exactly 1 (the spacing of doubles below 1 is 2^-53, about 1.1e-16), a
// share of 1e-320 is subnormal and divides a count into infinity, and
// nanoseconds since 1970 in 64 bits end in April 2262.
func TestFlagValueRanges(t *testing.T) {
	if one := 1 - 1e-17; one != 1 {
		t.Fatalf("1 - 1e-17 = %v; the limit below assumes it rounds to 1", one)
	}
	base := Overrides{ExposureEvent: "x", Control: "c", MultiArm: "exclude", Maturity: "exclude", Alpha: 0.05,
		Alternative: "two-sided", Adjust: "holm", Interval: "wilson", DifferenceInterval: "newcombe",
		NonInferiorityMethod: "farrington-manning", SampleRatioThreshold: 0.001, MinCount: 5, MaxSegmentValues: 100}
	for _, tc := range []struct {
		name string
		set  func(*Overrides)
		want string
	}{
		{"alpha 1e-17", func(o *Overrides) { o.Alpha = 1e-17 },
			"--alpha: 1e-17 is too small: want 1e-08 <= alpha < 0.5 (below 1e-08 the confidence level 1 - alpha cannot be computed or shown)"},
		{"split subnormal", func(o *Overrides) { o.Arms, o.Split = []string{"t"}, "1e-320,1" },
			`--split "1e-320,1": "1e-320" is too small next to 1: the largest share may be at most 1e+09 times the smallest`},
		{"split huge", func(o *Overrides) { o.Arms, o.Split = []string{"t"}, "1,1e300" },
			`--split "1,1e300": "1e300" is too large: want a share above 0 and at most 1e+12 (shares are relative: 1,1 is 50,50)`},
		{"split overflow", func(o *Overrides) { o.Arms, o.Split = []string{"t"}, "1,1e400" },
			`--split "1,1e400": "1e400" is too large`},
		{"end 2300", func(o *Overrides) { o.End = "2300-01-01" },
			`--end "2300-01-01" is out of range: want a time in the years 1678 to 2261`},
		{"start 2262 in range of the parser, outside the years", func(o *Overrides) { o.Start = "2262-01-01" },
			`--start 2262-01-01T00:00:00Z is out of range: want a time in the years 1678 to 2261`},
		{"sample ratio threshold subnormal", func(o *Overrides) { o.SampleRatioThreshold = 1e-320 },
			"--sample-ratio-threshold: 1e-320 is too small: want 1e-12 <= threshold < 1"},
		{"max segment values 0", func(o *Overrides) {
			o.MaxSegmentValues, o.Given = 0, func(f string) bool { return f == "max-segment-values" }
		},
			"--max-segment-values: 0: want 1 to 100000"},
		{"max segment values huge", func(o *Overrides) { o.MaxSegmentValues = 1e6 },
			"--max-segment-values: 1000000: want 1 to 100000"},
		{"min count huge", func(o *Overrides) { o.MinCount = 99999999999999999 },
			"--min-count: 99999999999999999 is too large: want 1 to 1000000000"},
	} {
		o := base
		tc.set(&o)
		err := o.Apply(NewSettings(), true)
		var fe *FlagError
		if !errors.As(err, &fe) || !strings.HasPrefix(err.Error(), tc.want) {
			t.Errorf("%s:\n got  %v\n want a FlagError starting %q", tc.name, err, tc.want)
		}
	}
	// The limits themselves are accepted.
	o := base
	o.Alpha, o.SampleRatioThreshold, o.MinCount = MinAlpha, MinSampleRatioThreshold, MaxMinCount
	o.Arms, o.Split = []string{"t"}, "1,1e9"
	o.Start, o.End = "1678-01-01", "2261-12-31"
	o.Metrics = []string{"buy=buy"}
	e := NewSettings()
	if err := o.Apply(e, true); err != nil {
		t.Fatalf("the limits themselves: %v", err)
	}
	spec, _, err := e.Build()
	if err != nil {
		t.Fatalf("the limits themselves: %v", err)
	}
	if spec.MaxSegmentValues != 100 {
		t.Errorf("MaxSegmentValues %d, want --max-segment-values 100", spec.MaxSegmentValues)
	}
}

// TestFileValueRanges checks that the spec file keys get the same checks
// as the flags, reported at the file's line and key.
func TestFileValueRanges(t *testing.T) {
	head := "[[experiment]]\nkey = \"k\"\narms = [\"control\", \"t\"]\n"
	tail := "\n[[experiment.metric]]\nname = \"buy\"\n"
	for _, tc := range []struct{ line, want string }{
		{"alpha = 1e-17", "s.toml:4: experiment[0].alpha: 1e-17 is too small: want 1e-08 <= alpha < 0.5"},
		{"split = [1e-320, 1]", `s.toml:4: experiment[0].split[0]: 1e-320 is too small next to 1`},
		{"split = [1, 1e300]", `s.toml:4: experiment[0].split[1]: 1e+300 is too large: want a share above 0 and at most 1e+12`},
		{`end = "2300-01-01"`, `s.toml:4: experiment[0].end: "2300-01-01" is out of range: want a time in the years 1678 to 2261`},
		{"end = 2300-01-01", `s.toml:4: experiment[0].end: 2300-01-01T00:00:00Z is out of range: want a time in the years 1678 to 2261`},
		{"sample_ratio_threshold = 1e-300", "s.toml:4: experiment[0].sample_ratio_threshold: 1e-300 is too small: want 1e-12 <= threshold < 1"},
		{"min_count = 10000000000", "s.toml:4: experiment[0].min_count: 10000000000 is too large: want 1 to 1000000000"},
	} {
		_, err := Parse("s.toml", []byte(head+tc.line+tail))
		if err == nil || !strings.HasPrefix(err.Error(), tc.want) {
			t.Errorf("%s:\n got  %v\n want an error starting %q", tc.line, err, tc.want)
		}
	}
}
