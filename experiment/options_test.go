package experiment

import (
	"fmt"
	"strings"
	"testing"

	"github.com/armtally/armtally/experiment/stats"
)

// TestOptionNames checks that every option value of package experiment
// prints the name the command line and the spec file spell (fixed by
// DESIGN.md and the CLI help), parses back from it, is valid, and that
// Parse refuses other names with the text the command line shows.
func TestOptionNames(t *testing.T) {
	tests := []struct {
		name    string
		values  []option
		names   []string
		parse   func(string) (option, error)
		invalid option
		bad     map[string]string // input -> error text
	}{
		{
			name:    "IntervalMethod",
			values:  []option{IntervalWilson, IntervalClopperPearson, IntervalAgrestiCoull, IntervalWald},
			names:   []string{"wilson", "clopper-pearson", "agresti-coull", "wald"},
			parse:   func(s string) (option, error) { return ParseIntervalMethod(s) },
			invalid: IntervalMethod(4),
			bad: map[string]string{
				"normal": `"normal": want wilson, clopper-pearson, agresti-coull or wald`,
				"Wilson": `"Wilson": want wilson, clopper-pearson, agresti-coull or wald`,
			},
		},
		{
			name:    "DifferenceMethod",
			values:  []option{DifferenceNewcombe, DifferenceWald},
			names:   []string{"newcombe", "wald"},
			parse:   func(s string) (option, error) { return ParseDifferenceMethod(s) },
			invalid: DifferenceMethod(-1),
			bad:     map[string]string{"score": `"score": want newcombe or wald`, "": `"": want newcombe or wald`},
		},
		{
			name:    "MultiArmPolicy",
			values:  []option{MultiArmExclude, MultiArmFirst},
			names:   []string{"exclude", "first"},
			parse:   func(s string) (option, error) { return ParseMultiArmPolicy(s) },
			invalid: MultiArmPolicy(2),
			bad:     map[string]string{"last": `unknown multi-arm policy "last" (want exclude or first)`},
		},
		{
			name:    "MaturityPolicy",
			values:  []option{MaturityExclude, MaturityInclude},
			names:   []string{"exclude", "include"},
			parse:   func(s string) (option, error) { return ParseMaturityPolicy(s) },
			invalid: MaturityPolicy(2),
			bad:     map[string]string{"wait": `unknown maturity policy "wait" (want exclude or include)`},
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			for i, v := range tc.values {
				if got := v.String(); got != tc.names[i] {
					t.Errorf("value %d prints %q, want %q", i, got, tc.names[i])
				}
				back, err := tc.parse(tc.names[i])
				if err != nil || back != v {
					t.Errorf("Parse(%q) = %v, %v; want %v", tc.names[i], back, err, v)
				}
				if !v.Valid() {
					t.Errorf("%v is not valid", v)
				}
			}
			if tc.invalid.Valid() {
				t.Errorf("%v is valid", tc.invalid)
			}
			if want := fmt.Sprintf("%s(%d)", tc.name, tc.invalid); tc.invalid.String() != want {
				t.Errorf("an out-of-range value prints %q, want %q", tc.invalid.String(), want)
			}
			for in, want := range tc.bad {
				if _, err := tc.parse(in); err == nil || err.Error() != want {
					t.Errorf("Parse(%q) error %v, want %q", in, err, want)
				}
			}
		})
	}
}

// TestOptionsValidatedOnce checks that Analyze refuses an unknown value of
// each option enum with an error naming the option, and that a tallier
// refuses an unknown policy.
func TestOptionsValidatedOnce(t *testing.T) {
	tl := twoArmTally([][2]int64{{48, 80}}, [][2]int64{{56, 70}})
	tests := []struct {
		want  string
		spoil func(*AnalysisOptions)
	}{
		{"unknown alternative Alternative(5)", func(o *AnalysisOptions) { o.Stats.Alternative = 5 }},
		{"unknown interval method IntervalMethod(9)", func(o *AnalysisOptions) { o.Interval = 9 }},
		{"unknown difference interval method DifferenceMethod(2)", func(o *AnalysisOptions) { o.Difference = 2 }},
		{"unknown multiple-comparison adjustment AdjustMethod(6)", func(o *AnalysisOptions) { o.Adjust = 6 }},
		{"unknown non-inferiority method NonInferiorityMethod(3)", func(o *AnalysisOptions) { o.NonInferiority = 3 }},
	}
	for _, tc := range tests {
		opts := DefaultAnalysisOptions()
		tc.spoil(&opts)
		if _, err := Analyze(spec2(), tl, opts); err == nil || err.Error() != tc.want {
			t.Errorf("error %v, want %q", err, tc.want)
		}
	}
	for _, spoil := range []func(*Spec){
		func(s *Spec) { s.MultiArm = 2 },
		func(s *Spec) { s.Maturity = 2 },
	} {
		spec := spec2()
		spoil(&spec)
		if _, err := NewTallier(spec); err == nil || !strings.Contains(err.Error(), "unknown policy") {
			t.Errorf("NewTallier error %v, want an unknown policy", err)
		}
	}
	// The printed names of the non-inferiority methods come from stats.
	opts := DefaultAnalysisOptions()
	opts.NonInferiority = stats.MiettinenNurminen
	r, err := Analyze(spec2(), tl, opts)
	if err != nil || r.Settings.NonInferiorityMethod != "Miettinen-Nurminen score" {
		t.Errorf("settings %q, %v", r.Settings.NonInferiorityMethod, err)
	}
}
