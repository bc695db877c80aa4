package stats

import (
	"errors"
	"strings"
	"testing"
)

// Non-inferiority, experiment/REFERENCE-VALUES.md section 12: Wald from
// statsmodels 0.13.5 test_proportions_2indep(method='wald') [= R formula];
// score values from the Farrington-Manning cubic evaluated in R 4.2.2
// [= mpmath 40-digit maximisation of the likelihood].
func TestNonInferiority(t *testing.T) {
	tests := []struct {
		id                 string
		x1, n1, x2, n2     int64
		margin             float64
		zWald, pWald       float64
		mle                [2]float64
		zFM, pFM, zMN, pMN float64
	}{
		{"NI-01", 1180, 10000, 1200, 10000, 0.01,
			1.7470913983597722, 0.04031074260977504,
			[2]float64{0.11414519178669086, 0.12414519178669085},
			1.7463701392443087, 0.04037332761886865, 1.746326479445073, 0.04037711859299289},
		{"NI-02", 430, 5000, 400, 5000, 0.005,
			1.9937222438413427, 0.02309120855257471,
			[2]float64{0.0806503783693922, 0.08565037836939221},
			1.9920458144837125, 0.023183015673639357, 1.9919462097028064, 0.023188480036756946},
	}
	for _, tc := range tests {
		t.Run(tc.id, func(t *testing.T) {
			r1, r2 := restrictedMLE(tc.x1, tc.n1, tc.x2, tc.n2, -tc.margin)
			near(t, "restricted p1", r1, tc.mle[0], 1e-10, 0)
			near(t, "restricted p2", r2, tc.mle[1], 1e-10, 0)
			for _, m := range []struct {
				method NonInferiorityMethod
				z, p   float64
				zTol   float64
			}{{WaldNonInferiority, tc.zWald, tc.pWald, 1e-12}, {FarringtonManning, tc.zFM, tc.pFM, 1e-10}, {MiettinenNurminen, tc.zMN, tc.pMN, 1e-10}} {
				zt, err := NonInferiorityZTest(tc.x1, tc.n1, tc.x2, tc.n2, tc.margin, 0.05, m.method)
				if err != nil {
					t.Fatal(err)
				}
				near(t, m.method.String()+" z", zt.Statistic, m.z, m.zTol, 0)
				near(t, m.method.String()+" p", zt.PValue, m.p, 1e-10, 0)
				if zt.Alternative != Greater || !zt.RejectByPValue || !zt.RejectByStatistic {
					t.Errorf("%v: %+v, want a one-sided rejection at 0.05", m.method, zt)
				}
			}
		})
	}
}

func TestNonInferiorityEdges(t *testing.T) {
	// Both arms at 0: the score variance stays positive with a margin
	// (restricted MLE p2~ = margin), so the test is defined.
	zt, err := NonInferiorityZTest(0, 100, 0, 100, 0.05, 0.05, FarringtonManning)
	if err != nil || len(zt.Warnings) != 0 || !(zt.Statistic > 0) {
		t.Errorf("0/100 vs 0/100 score: %+v %v", zt, err)
	}
	// Wald has zero variance there: z = 0, p = 1 and a warning.
	zt, err = NonInferiorityZTest(0, 100, 0, 100, 0.05, 0.05, WaldNonInferiority)
	if err != nil || zt.PValue != 1 || zt.RejectByPValue || zt.RejectByStatistic || len(zt.Warnings) != 1 || !strings.Contains(zt.Warnings[0], "variance is 0") {
		t.Errorf("0/100 vs 0/100 Wald: %+v %v", zt, err)
	}
	// Margin 0 reduces the score test to the pooled z test, one-sided
	// (experiment/REFERENCE-VALUES.md P2-01: z = 2.650171951258533, p greater
	// 0.0040225406840982865, R 4.2.2 prop.test).
	zt, err = NonInferiorityZTest(56, 70, 48, 80, 0, 0.05, FarringtonManning)
	if err != nil {
		t.Fatal(err)
	}
	near(t, "margin 0 z", zt.Statistic, 2.650171951258533, 1e-10, 0)
	near(t, "margin 0 p", zt.PValue, 0.0040225406840982865, 1e-9, 0)
	for _, m := range []float64{-0.01, 1, 2} {
		if _, err := NonInferiorityZTest(5, 10, 5, 10, m, 0.05, FarringtonManning); !errors.Is(err, ErrBadParameter) {
			t.Errorf("margin %v: err = %v", m, err)
		}
	}
	if _, err := NonInferiorityZTest(5, 10, 5, 10, 0.1, 0.05, NonInferiorityMethod(9)); !errors.Is(err, ErrBadParameter) {
		t.Errorf("bad method: err = %v", err)
	}
	if _, err := NonInferiorityZTest(11, 10, 5, 10, 0.1, 0.05, FarringtonManning); !errors.Is(err, ErrBadCount) {
		t.Errorf("x1 > n1: err = %v", err)
	}
}
