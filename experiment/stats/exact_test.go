package stats

import (
	"errors"
	"math"
	"testing"
	"time"

	"gonum.org/v1/gonum/mathext"
)

// One-proportion z test, experiment/REFERENCE-VALUES.md section 4: R 4.2.2
// stats::prop.test(x, n, p = p0, correct=FALSE), z = sign(p_hat - p0) *
// sqrt(X-squared).
func TestOneProportionZTest(t *testing.T) {
	tests := []struct {
		id    string
		x, n  int64
		p0, z float64
		p     pvals
	}{
		{"P1Z-01", 520, 1000, 0.5, 1.2649110640673518, pvals{0.20590321073206835, 0.10295160536603418, 0.8970483946339658}},
		{"P1Z-02", 96, 1000, 0.12, -2.335496832484569, pvals{0.019517481182177762, 0.9902412594089112, 0.009758740591088878}},
		{"P1Z-03", 2155, 20000, 0.1, 3.6533850361304956, pvals{0.00025880569234923705, 0.00012940284617461828, 0.9998705971538254}},
		{"P1Z-04", 3, 20, 0.05, 2.051956704170308, pvals{0.0401738702885121, 0.02008693514425606, 0.9799130648557439}},
		{"P1Z-05", 0, 50, 0.02, -1.0101525445522108, pvals{0.3124222112426934, 0.8437888943786533, 0.1562111056213467}},
		{"P1Z-06", 1, 1, 0.5, 1, pvals{0.31731050786291415, 0.15865525393145705, 0.8413447460685429}},
	}
	for _, tc := range tests {
		t.Run(tc.id, func(t *testing.T) {
			for _, a := range []struct {
				alt  Alternative
				want float64
			}{{TwoSided, tc.p.two}, {Greater, tc.p.greater}, {Less, tc.p.less}} {
				zt, err := OneProportionZTest(tc.x, tc.n, tc.p0, 0.05, a.alt)
				if err != nil {
					t.Fatal(err)
				}
				near(t, "z", zt.Statistic, tc.z, 1e-12, 0)
				near(t, "X-squared = z^2", zt.Statistic*zt.Statistic, tc.z*tc.z, 1e-12, 0)
				near(t, "p "+a.alt.String(), zt.PValue, a.want, 1e-10, 0)
			}
		})
	}
	for _, p0 := range []float64{0, 1, -0.1, 1.1, math.NaN()} {
		if _, err := OneProportionZTest(1, 10, p0, 0.05, TwoSided); !errors.Is(err, ErrBadParameter) {
			t.Errorf("p0 = %v: err = %v, want ErrBadParameter", p0, err)
		}
	}
	if _, err := OneProportionZTest(0, 0, 0.5, 0.05, TwoSided); !errors.Is(err, ErrBadCount) {
		t.Errorf("n = 0: err = %v, want ErrBadCount", err)
	}
}

// Exact binomial test, experiment/REFERENCE-VALUES.md section 5: R 4.2.2
// stats::binom.test(x, n, p0, alternative=...)$p.value [= SciPy binomtest,
// mpmath 50-digit sum]; rel 1e-9.
func TestBinomialExact(t *testing.T) {
	tests := []struct {
		id   string
		x, n int64
		p0   float64
		p    pvals
	}{
		{"BT-01", 7, 20, 0.5, pvals{0.26317596435546875, 0.9423408508300781, 0.13158798217773438}},
		{"BT-02", 3, 20, 0.05, pvals{0.07548367378849637, 0.07548367378849637, 0.9840984739802364}},
		{"BT-03", 0, 50, 0.02, pvals{0.6283982856253911, 1, 0.36416968008711725}},
		{"BT-04", 96, 1000, 0.12, pvals{0.019385855706173773, 0.9928244295744422, 0.009523824708830892}},
		{"BT-05 tie", 1, 6, 0.5, pvals{0.21875000000000008, 0.984375, 0.10937500000000004}},
		{"BT-06 tie across the mode", 2, 9, 1.0 / 7, pvals{0.625397947697712, 0.3756632461628524, 0.8740714553720067}},
		{"BT-07", 10, 10, 0.9, pvals{0.6125795110000002, 0.34867844010000015, 1}},
	}
	for _, tc := range tests {
		t.Run(tc.id, func(t *testing.T) {
			for _, a := range []struct {
				alt  Alternative
				want float64
			}{{TwoSided, tc.p.two}, {Greater, tc.p.greater}, {Less, tc.p.less}} {
				et, err := BinomialExact(tc.x, tc.n, tc.p0, 0.05, a.alt)
				if err != nil {
					t.Fatal(err)
				}
				near(t, "p "+a.alt.String(), et.PValue, a.want, 1e-9, 0)
				if et.Reject != (et.PValue <= 0.05) || et.Method != "exact binomial test" {
					t.Errorf("decision/method: %+v", et)
				}
			}
		})
	}
}

// TestBinomialExactSpecial covers x = n p0 (p = 1 by the rule, as R's
// binom.test), n = 1 (hand arithmetic) and bad input.
func TestBinomialExactSpecial(t *testing.T) {
	et, _ := BinomialExact(5, 10, 0.5, 0.05, TwoSided)
	if et.PValue != 1 {
		t.Errorf("x = n p0: p = %v, want 1", et.PValue)
	}
	// n = 1, x = 1, p0 = 0.3: greater P(X >= 1) = 0.3; less P(X <= 1) = 1;
	// two-sided: P(1) = 0.3 <= P(0) = 0.7, so only x = 1 counts: 0.3.
	for _, c := range []struct {
		alt  Alternative
		want float64
	}{{Greater, 0.3}, {Less, 1}, {TwoSided, 0.3}} {
		et, err := BinomialExact(1, 1, 0.3, 0.05, c.alt)
		if err != nil {
			t.Fatal(err)
		}
		near(t, "n=1 "+c.alt.String(), et.PValue, c.want, 1e-14, 0)
	}
	if _, err := BinomialExact(0, 0, 0.5, 0.05, TwoSided); !errors.Is(err, ErrBadCount) {
		t.Errorf("n = 0: err = %v", err)
	}
	if _, err := BinomialExact(1, 5, 1, 0.05, TwoSided); !errors.Is(err, ErrBadParameter) {
		t.Errorf("p0 = 1: err = %v", err)
	}
}

// Fisher's exact test, experiment/REFERENCE-VALUES.md section 8: R 4.2.2
// stats::fisher.test(matrix, alternative=...)$p.value [= SciPy fisher_exact,
// mpmath 50-digit sum]; rel 1e-9. Rows are arms, treatment first.
func TestFisherExact(t *testing.T) {
	tests := []struct {
		id             string
		x1, n1, x2, n2 int64
		p              pvals
	}{
		{"FE-01 [[3,1],[1,3]]", 3, 4, 1, 4, pvals{0.4857142857142858, 0.24285714285714288, 0.9857142857142858}},
		{"FE-02 [[9,1],[3,7]]", 9, 10, 3, 10, pvals{0.01976661109788042, 0.009883305548940213, 0.9996427720885925}},
		{"FE-03 [[4,0],[1,5]] tie", 4, 4, 1, 6, pvals{0.047619047619047616, 0.023809523809523805, 1}},
		{"FE-04 [[5,51],[0,29]]", 5, 56, 0, 29, pvals{0.16062144320947117, 0.1164524189536722, 1}},
		{"FE-05 [[0,10],[0,20]]", 0, 10, 0, 20, pvals{1, 1, 1}},
		{"FE-06 [[1300,23700],[1200,23800]]", 1300, 25000, 1200, 25000, pvals{0.042191296508191097, 0.021095648254095548, 0.9808990504978028}},
	}
	for _, tc := range tests {
		t.Run(tc.id, func(t *testing.T) {
			for _, a := range []struct {
				alt  Alternative
				want float64
			}{{TwoSided, tc.p.two}, {Greater, tc.p.greater}, {Less, tc.p.less}} {
				et, err := FisherExact(tc.x1, tc.n1, tc.x2, tc.n2, 0.05, a.alt)
				if err != nil {
					t.Fatal(err)
				}
				near(t, "p "+a.alt.String(), et.PValue, a.want, 1e-9, 0)
				if et.Reject != (et.PValue <= 0.05) || et.Method != "Fisher's exact test" {
					t.Errorf("decision/method: %+v", et)
				}
			}
		})
	}
}

// TestFisherExactSpecial: the single-table cases and n = 1 by hand
// arithmetic, and bad input.
func TestFisherExactSpecial(t *testing.T) {
	// Every unit converting: one possible table, p = 1 (as FE-05 for 0).
	for _, alt := range []Alternative{TwoSided, Greater, Less} {
		et, err := FisherExact(3, 3, 5, 5, 0.05, alt)
		if err != nil || et.PValue != 1 {
			t.Errorf("all converted %v: %+v %v, want p = 1", alt, et, err)
		}
	}
	// [[1,0],[0,1]]: k = 1, P(A = 1) = P(A = 0) = 1/2; greater P(A >= 1)
	// = 1/2, two-sided 1 (both outcomes equally likely).
	et, _ := FisherExact(1, 1, 0, 1, 0.05, Greater)
	near(t, "n=1 greater", et.PValue, 0.5, 1e-14, 0)
	et, _ = FisherExact(1, 1, 0, 1, 0.05, TwoSided)
	near(t, "n=1 two-sided", et.PValue, 1, 1e-14, 0)
	if _, err := FisherExact(1, 0, 0, 1, 0.05, TwoSided); !errors.Is(err, ErrBadCount) {
		t.Errorf("n1 = 0: err = %v", err)
	}
}

// TestFisherExactLarge runs a table of two million units. The reference is
// the pooled z test's p-value (experiment/REFERENCE-VALUES.md P2-13 uses the
// same counts): for 230/1e6 vs 180/1e6 Fisher's p must be near the z test's
// 0.0135 (R 4.2.2 prop.test) but a little larger, exact tests being
// conservative; and the call must be fast.
func TestFisherExactLarge(t *testing.T) {
	start := time.Now()
	et, err := FisherExact(230, 1000000, 180, 1000000, 0.05, TwoSided)
	if err != nil {
		t.Fatal(err)
	}
	if d := time.Since(start); d > 200*time.Millisecond {
		t.Errorf("FisherExact on 2e6 units took %v", d)
	}
	if !(et.PValue > 0.013527285101962345 && et.PValue < 0.02) {
		t.Errorf("p = %v, want a little above the z test's 0.013527", et.PValue)
	}
	// Half a million conversions per arm: the sums stop where the terms
	// vanish instead of visiting a million terms.
	start = time.Now()
	et, err = FisherExact(500400, 1000000, 499000, 1000000, 0.05, TwoSided)
	if err != nil {
		t.Fatal(err)
	}
	if d := time.Since(start); d > 200*time.Millisecond {
		t.Errorf("FisherExact on 1e6 conversions took %v", d)
	}
	if !(et.PValue > 0 && et.PValue < 0.1) {
		t.Errorf("p = %v", et.PValue)
	}
}

// TestBinomTailAgainstRegIncBeta compares the summed binomial tails with
// gonum's regularized incomplete beta function, which is accurate for small
// n: P(X >= k) = I_p(k, n-k+1), P(X <= k) = I_{1-p}(n-k, k+1).
func TestBinomTailAgainstRegIncBeta(t *testing.T) {
	for _, n := range []int64{1, 2, 5, 17, 60, 300} {
		for _, p := range []float64{0.001, 0.05, 0.3, 0.5, 0.77, 0.999} {
			for k := int64(0); k <= n; k += 1 + n/13 {
				if k > 0 {
					want := mathext.RegIncBeta(float64(k), float64(n-k+1), p)
					near(t, "upper tail", binomTail(k, n, p, true), want, 1e-11, 1e-300)
				}
				if k < n {
					want := mathext.RegIncBeta(float64(n-k), float64(k+1), 1-p)
					near(t, "lower tail", binomTail(k, n, p, false), want, 1e-11, 1e-300)
				}
			}
		}
	}
}
