package stats

import (
	"reflect"
	"testing"
)

// The rule of thumb (experiment/DESIGN.md, "Conditions"; common practice): at
// least minCount conversions and non-conversions per arm.
func TestTwoSampleCondition(t *testing.T) {
	tests := []struct {
		name           string
		x1, n1, x2, n2 int64
		min            int64
		ok             bool
		warnings       []string
	}{
		{"all large", 50, 100, 40, 100, 5, true, nil},
		{"exactly 5", 5, 10, 5, 10, 5, true, nil},
		{"control short", 50, 100, 3, 100, 5, false, []string{"normal approximation not justified: control has 3 conversions, needs at least 5"}},
		{"treatment all converted", 10, 10, 40, 100, 5, false, []string{"normal approximation not justified: treatment has 0 non-conversions, needs at least 5"}},
		{"min 10", 9, 100, 50, 100, 10, false, []string{"normal approximation not justified: treatment has 9 conversions, needs at least 10"}},
		{"n = 1", 1, 1, 0, 1, 5, false, []string{
			"normal approximation not justified: treatment has 1 conversion, needs at least 5",
			"normal approximation not justified: treatment has 0 non-conversions, needs at least 5",
			"normal approximation not justified: control has 0 conversions, needs at least 5",
			"normal approximation not justified: control has 1 non-conversion, needs at least 5",
		}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			ok, w := TwoSampleCondition(tc.x1, tc.n1, tc.x2, tc.n2, tc.min)
			if ok != tc.ok || !reflect.DeepEqual(w, tc.warnings) {
				t.Errorf("got %v %q, want %v %q", ok, w, tc.ok, tc.warnings)
			}
		})
	}
	if ok, w := TwoSampleCondition(1, 0, 5, 10, 5); ok || len(w) == 0 {
		t.Errorf("n1 = 0: %v %q, want not ok with a warning", ok, w)
	}
}

func TestOneSampleCondition(t *testing.T) {
	tests := []struct {
		name     string
		n        int64
		p0       float64
		min      int64
		ok       bool
		warnings []string
	}{
		{"large", 1000, 0.5, 5, true, nil},
		{"n p0 = 5 exactly", 100, 0.05, 5, true, nil}, // 100 * 0.05 = 5 in floating point
		{"P1Z-04 fails", 20, 0.05, 5, false, []string{"normal approximation not justified: expected conversions n p0 = 1, needs at least 5"}},
		{"P1Z-06 fails", 1, 0.5, 5, false, []string{
			"normal approximation not justified: expected conversions n p0 = 0.5, needs at least 5",
			"normal approximation not justified: expected non-conversions n (1 - p0) = 0.5, needs at least 5",
		}},
		{"high target", 100, 0.97, 5, false, []string{"normal approximation not justified: expected non-conversions n (1 - p0) = 3, needs at least 5"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			ok, w := OneSampleCondition(tc.n, tc.p0, tc.min)
			if ok != tc.ok || !reflect.DeepEqual(w, tc.warnings) {
				t.Errorf("got %v %q, want %v %q", ok, w, tc.ok, tc.warnings)
			}
		})
	}
	for _, c := range []struct {
		n  int64
		p0 float64
	}{{0, 0.5}, {10, 0}, {10, 1}} {
		if ok, w := OneSampleCondition(c.n, c.p0, 5); ok || len(w) != 1 {
			t.Errorf("n=%d p0=%v: %v %q", c.n, c.p0, ok, w)
		}
	}
}
