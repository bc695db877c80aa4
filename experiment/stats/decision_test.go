package stats

import (
	"math"
	"testing"
)

// agree reports whether the two decision routes of a z test agree. They
// may differ only when the statistic equals the critical value to within
// rounding, where Q(crit) and alpha differ in the last bits.
func agree(t *testing.T, zt ZTest) bool {
	t.Helper()
	if zt.RejectByStatistic == zt.RejectByPValue {
		return true
	}
	t.Logf("routes differ within rounding: %+v", zt)
	return math.Abs(math.Abs(zt.Statistic)-zt.CriticalValue) <= 1e-12*zt.CriticalValue
}

// TestDecisionRoutesAgree checks, over a grid of counts, alphas and
// alternatives, that |z| >= critical value exactly when p <= alpha
// (experiment/REFERENCE-VALUES.md, "How to read these tables": the two
// decision routes must give the same answer), and that no result is NaN or
// infinite.
func TestDecisionRoutesAgree(t *testing.T) {
	alphas := []float64{0.001, 0.01, 0.05, 0.1, 0.2}
	alts := []Alternative{TwoSided, Greater, Less}
	ns := []int64{1, 2, 3, 7, 20, 101, 1000, 25000}
	checked, rejections := 0, 0
	for _, n1 := range ns {
		for _, n2 := range ns {
			for _, x1 := range grid(n1) {
				for _, x2 := range grid(n2) {
					for _, a := range alphas {
						for _, alt := range alts {
							zt, err := TwoProportionZTest(x1, n1, x2, n2, a, alt)
							if err != nil {
								t.Fatal(err)
							}
							if bad(zt.Statistic) || bad(zt.PValue) || bad(zt.CriticalValue) {
								t.Fatalf("%d/%d vs %d/%d: non-finite %+v", x1, n1, x2, n2, zt)
							}
							if !agree(t, zt) {
								t.Errorf("%d/%d vs %d/%d alpha %v %v: routes disagree: %+v", x1, n1, x2, n2, a, alt, zt)
							}
							checked++
							if zt.RejectByPValue {
								rejections++
							}
						}
					}
				}
			}
		}
	}
	for _, n := range ns {
		for _, x := range grid(n) {
			for _, p0 := range []float64{0.001, 0.05, 0.1, 0.5, 0.9} {
				for _, a := range alphas {
					for _, alt := range alts {
						zt, err := OneProportionZTest(x, n, p0, a, alt)
						if err != nil {
							t.Fatal(err)
						}
						if bad(zt.Statistic) || bad(zt.PValue) {
							t.Fatalf("%d/%d p0 %v: non-finite %+v", x, n, p0, zt)
						}
						if !agree(t, zt) {
							t.Errorf("%d/%d p0 %v alpha %v %v: routes disagree: %+v", x, n, p0, a, alt, zt)
						}
						checked++
					}
				}
			}
		}
	}
	// The grid must exercise both decisions, or the check is empty.
	t.Logf("%d tests, %d rejections", checked, rejections)
	if rejections == 0 || rejections == checked {
		t.Fatalf("grid has %d rejections out of %d tests", rejections, checked)
	}
}

// TestDecisionAtTheBoundary puts z exactly on the critical value: a test
// statistic equal to z_{1-alpha/2} rejects by both routes only if p(crit)
// <= alpha; the routes are documented to agree to within rounding there.
func TestDecisionAtTheBoundary(t *testing.T) {
	for _, a := range []float64{0.001, 0.01, 0.05, 0.1} {
		for _, alt := range []Alternative{TwoSided, Greater, Less} {
			crit := CriticalValue(a, alt)
			z := crit
			if alt == Less {
				z = -crit
			}
			zt := decide("boundary", z, a, alt)
			if !zt.RejectByStatistic {
				t.Errorf("alpha %v %v: z = crit not rejected by statistic", a, alt)
			}
			near(t, "p at the critical value", zt.PValue, a, 1e-13, 0) // by definition of the critical value
		}
	}
}

// grid returns a spread of conversion counts for n units, including 0, 1,
// n-1 and n.
func grid(n int64) []int64 {
	seen := map[int64]bool{}
	var out []int64
	for _, x := range []int64{0, 1, 2, n / 10, n / 4, n / 3, n / 2, n - n/3, n - 2, n - 1, n} {
		if x >= 0 && x <= n && !seen[x] {
			seen[x] = true
			out = append(out, x)
		}
	}
	return out
}

func bad(v float64) bool { return math.IsNaN(v) || math.IsInf(v, 0) }
