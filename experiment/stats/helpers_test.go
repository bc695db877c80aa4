package stats

import (
	"math"
	"testing"
)

// near fails the test unless |got - want| <= rel |want| or
// |got - want| <= abs, the tolerances of experiment/REFERENCE-VALUES.md. (gonum's
// scalar.EqualWithinRel compares differences below the smallest normal float
// absolutely, which rejects any two distinct values near 1e-300.)
func near(t *testing.T, what string, got, want, rel, abs float64) {
	t.Helper()
	if math.IsNaN(got) || math.IsInf(got, 0) {
		t.Errorf("%s = %v, want %v", what, got, want)
		return
	}
	if got == want {
		return
	}
	if d := math.Abs(got - want); !(d <= rel*math.Abs(want) || d <= abs) {
		t.Errorf("%s = %.17g, want %.17g (rel err %.3g, tolerance rel %g abs %g)", what, got, want, math.Abs(got-want)/math.Abs(want), rel, abs)
	}
}

// nearInterval checks both ends of an interval.
func nearInterval(t *testing.T, what string, got Interval, want [2]float64, rel, abs float64) {
	t.Helper()
	near(t, what+" lower", got.Lower, want[0], rel, abs)
	near(t, what+" upper", got.Upper, want[1], rel, abs)
}

// pvals holds the p-values of the three alternatives.
type pvals struct{ two, greater, less float64 }
