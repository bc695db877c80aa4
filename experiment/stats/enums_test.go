package stats

import (
	"fmt"
	"strings"
	"testing"
)

// enumCase is one option enum: its values with the names the command line
// and the spec file spell (fixed by DESIGN.md and the CLI help), names its
// Parse function must refuse with the error text given, and an
// out-of-range value that Valid must refuse.
type enumCase struct {
	name    string
	values  []fmt.Stringer
	names   []string
	parse   func(string) (fmt.Stringer, error)
	valid   func(fmt.Stringer) bool
	invalid fmt.Stringer
	bad     map[string]string // input -> error text
}

func enumCases() []enumCase {
	return []enumCase{
		{
			name:    "Alternative",
			values:  []fmt.Stringer{TwoSided, Greater, Less},
			names:   []string{"two-sided", "greater", "less"},
			parse:   func(s string) (fmt.Stringer, error) { return ParseAlternative(s) },
			valid:   func(v fmt.Stringer) bool { return v.(Alternative).Valid() },
			invalid: Alternative(3),
			bad: map[string]string{
				"bigger": `bad parameter: alternative "bigger" (want two-sided, greater or less)`,
				"":       `bad parameter: alternative "" (want two-sided, greater or less)`,
			},
		},
		{
			name:    "AdjustMethod",
			values:  []fmt.Stringer{None, Bonferroni, Holm, Hochberg, BenjaminiHochberg, BenjaminiYekutieli},
			names:   []string{"none", "bonferroni", "holm", "hochberg", "bh", "by"},
			parse:   func(s string) (fmt.Stringer, error) { return ParseAdjustMethod(s) },
			valid:   func(v fmt.Stringer) bool { return v.(AdjustMethod).Valid() },
			invalid: AdjustMethod(-1),
			bad: map[string]string{
				"fdr": `bad parameter: adjustment "fdr" (want none, bonferroni, holm, hochberg, bh or by)`,
			},
		},
		{
			name:    "NonInferiorityMethod",
			values:  []fmt.Stringer{FarringtonManning, MiettinenNurminen, WaldNonInferiority},
			names:   []string{"farrington-manning", "miettinen-nurminen", "wald"},
			parse:   func(s string) (fmt.Stringer, error) { return ParseNonInferiorityMethod(s) },
			valid:   func(v fmt.Stringer) bool { return v.(NonInferiorityMethod).Valid() },
			invalid: NonInferiorityMethod(3),
			bad: map[string]string{
				"score":                    `"score": want farrington-manning, miettinen-nurminen or wald`,
				"Farrington-Manning score": `"Farrington-Manning score": want farrington-manning, miettinen-nurminen or wald`,
				" wald":                    `" wald": want farrington-manning, miettinen-nurminen or wald`,
			},
		},
	}
}

// TestEnumNames checks that every option value prints the name fixed for
// it, parses back from it, is valid, and that Parse refuses other names
// with the text the command line shows.
func TestEnumNames(t *testing.T) {
	for _, tc := range enumCases() {
		t.Run(tc.name, func(t *testing.T) {
			for i, v := range tc.values {
				if got := v.String(); got != tc.names[i] {
					t.Errorf("value %d prints %q, want %q", i, got, tc.names[i])
				}
				back, err := tc.parse(tc.names[i])
				if err != nil || back != v {
					t.Errorf("Parse(%q) = %v, %v; want %v", tc.names[i], back, err, v)
				}
				if !tc.valid(v) {
					t.Errorf("%v is not valid", v)
				}
			}
			if tc.valid(tc.invalid) {
				t.Errorf("%v is valid", tc.invalid)
			}
			if !strings.HasPrefix(tc.invalid.String(), tc.name+"(") {
				t.Errorf("an out-of-range value prints %q", tc.invalid.String())
			}
			for in, want := range tc.bad {
				if _, err := tc.parse(in); err == nil || err.Error() != want {
					t.Errorf("Parse(%q) error %v, want %q", in, err, want)
				}
			}
		})
	}
}

// TestNonInferiorityMethodName checks the names the readout prints, which
// name the published tests (Farrington and Manning 1990, Miettinen and
// Nurminen 1985).
func TestNonInferiorityMethodName(t *testing.T) {
	want := map[NonInferiorityMethod]string{
		FarringtonManning:       "Farrington-Manning score",
		MiettinenNurminen:       "Miettinen-Nurminen score",
		WaldNonInferiority:      "Wald",
		NonInferiorityMethod(7): "NonInferiorityMethod(7)",
	}
	for m, name := range want {
		if got := m.Name(); got != name {
			t.Errorf("%d.Name() = %q, want %q", int(m), got, name)
		}
	}
}
