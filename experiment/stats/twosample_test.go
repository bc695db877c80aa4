package stats

import (
	"errors"
	"strings"
	"testing"
)

// Two proportions, experiment/REFERENCE-VALUES.md section 7. z and p-values:
// R 4.2.2 stats::prop.test(c(x1,x2), c(n1,n2), correct=FALSE)
// (z = sign(p1-p2) * sqrt(X-squared)); Wald CI: its $conf.int; Newcombe:
// method 10 from R's Wilson limits [= statsmodels confint_proportions_2indep]; Katz:
// epitools 0.5-10.1 riskratio.wald; Woolf: epitools oddsratio.wald.
type twoSampleCase struct {
	id                    string
	x1, n1, x2, n2        int64
	level                 float64
	z                     float64
	p                     pvals
	wald, newcombe        [2]float64
	ratio                 float64 // SciPy 1.10.1 relative_risk; 0 = undefined
	katz, woolf           [2]float64
	katzUndef, woolfUndef bool
}

func TestTwoSample(t *testing.T) {
	twoSampleCases := []twoSampleCase{
		{id: "P2-01", x1: 56, n1: 70, x2: 48, n2: 80, level: 0.95,
			z: 2.650171951258533, p: pvals{0.008045081368196564, 0.0040225406840982865, 0.9959774593159018},
			wald:     [2]float64{0.05750489914903717, 0.34249510085096296},
			newcombe: [2]float64{0.052431472402364926, 0.33387265403690586},
			ratio:    1.3333333333333335, katz: [2]float64{1.076626422763193, 1.651248511266387},
			woolf: [2]float64{1.276217870536434, 5.572019696074378}},
		{id: "P2-02", x1: 9, n1: 10, x2: 3, n2: 10, level: 0.95,
			z: 2.7386127875258306, p: pvals{0.006169899320544153, 0.00308494966027208, 0.9969150503397279},
			wald:     [2]float64{0.2605242797771487, 0.9394757202228514},
			newcombe: [2]float64{0.17052272393450307, 0.809017973535488},
			ratio:    3, katz: [2]float64{1.1383503574476705, 7.906177514784793},
			woolf: [2]float64{1.7774858510064275, 248.10324073764193}},
		{id: "P2-03", x1: 6, n1: 7, x2: 2, n2: 7, level: 0.95,
			z: 2.1602468994692865, p: pvals{0.03075356125927456, 0.015376780629637292, 0.9846232193703627},
			wald:     [2]float64{0.1481161402664305, 0.9947410025907123},
			newcombe: [2]float64{0.058227927482312314, 0.8062496375242277},
			ratio:    3, katz: [2]float64{0.8948459075994676, 10.057597541171745},
			woolf: [2]float64{1.0306911611224634, 218.3001159677804}},
		{id: "P2-04", x1: 5, n1: 56, x2: 0, n2: 29, level: 0.95,
			z: 1.6586488692392285, p: pvals{0.09718656817057975, 0.048593284085289866, 0.9514067159147102},
			wald:      [2]float64{0.014600240442592019, 0.16397118812883654},
			newcombe:  [2]float64{-0.03813714790353685, 0.19256001385511157},
			katzUndef: true, woolfUndef: true},
		{id: "P2-07", x1: 10, n1: 10, x2: 0, n2: 20, level: 0.95,
			z: 5.477225575051661, p: pvals{4.320463057827497e-08, 2.160231528913748e-08, 0.9999999783976847},
			wald:      [2]float64{1, 1},
			newcombe:  [2]float64{0.6790860371419148, 1},
			katzUndef: true, woolfUndef: true},
		{id: "P2-08", x1: 10, n1: 10, x2: 0, n2: 10, level: 0.95,
			z: 4.47213595499958, p: pvals{7.744216431044086e-06, 3.872108215522037e-06, 0.9999961278917845},
			wald:      [2]float64{1, 1},
			newcombe:  [2]float64{0.6075093504305243, 1},
			katzUndef: true, woolfUndef: true},
		{id: "P2-09", x1: 1300, n1: 25000, x2: 1200, n2: 25000, level: 0.95,
			z: 2.051956704170308, p: pvals{0.0401738702885121, 0.02008693514425606, 0.9799130648557439},
			wald:     [2]float64{0.00017948769772755876, 0.007820512302272434},
			newcombe: [2]float64{0.00017869647965400737, 0.00782413670663827},
			ratio:    1.0833333333333333, katz: [2]float64{1.0035711815352768, 1.169434846978871},
			woolf: [2]float64{1.0037638667161324, 1.1790979291787216}},
		{id: "P2-10", x1: 612, n1: 5000, x2: 550, n2: 5000, level: 0.95,
			z: 1.9346910690190207, p: pvals{0.053028216981673884, 0.02651410849083682, 0.9734858915091632},
			wald:     [2]float64{-0.00015963028195809317, 0.024959630281958082},
			newcombe: [2]float64{-0.00016572177876952691, 0.024971545750323523},
			ratio:    1.1127272727272726, katz: [2]float64{0.9985340540157123, 1.2399797267721338},
			woolf: [2]float64{0.9983711553684845, 1.2754758041774403}},
		{id: "P2-11", x1: 480, n1: 4000, x2: 1000, n2: 9000, level: 0.95,
			z: 1.4726966769056116, p: pvals{0.14083284304712274, 0.07041642152356167, 0.9295835784764384},
			wald:     [2]float64{-0.003093199391876012, 0.020870977169653793},
			newcombe: [2]float64{-0.0028833830932101807, 0.021094040730220337},
			ratio:    1.08, katz: [2]float64{0.9750174390577792, 1.1962862952760784},
			woolf: [2]float64{0.971595126537977, 1.2248750658812428}},
		{id: "P2-12", x1: 2100, n1: 20000, x2: 2000, n2: 20000, level: 0.9,
			z: 1.6485071799289588, p: pvals{0.0992486385591891, 0.04962431927959474, 0.9503756807204052},
			wald:     [2]float64{1.1250873379153696e-05, 0.009988749126620827},
			newcombe: [2]float64{1.0772341654418337e-05, 0.00998991354541131},
			ratio:    1.0499999999999998, katz: [2]float64{1.000101655214079, 1.102387936518315},
			woolf: [2]float64{1.0001156501748267, 1.1147239267755944}},
		{id: "P2-13", x1: 230, n1: 1000000, x2: 180, n2: 1000000, level: 0.95,
			z: 2.469577136254767, p: pvals{0.013527285101962345, 0.006763642550981173, 0.9932363574490188},
			wald:     [2]float64{1.0317882616382653e-05, 8.968211738361734e-05},
			newcombe: [2]float64{1.0297490616742118e-05, 9.003159651827525e-05},
			ratio:    1.2777777777777777, katz: [2]float64{1.0513708628142133, 1.5529401728067782},
			woolf: [2]float64{1.051382024418342, 1.5530790185763277}},
	}
	for _, tc := range twoSampleCases {
		t.Run(tc.id, func(t *testing.T) {
			for _, a := range []struct {
				alt  Alternative
				want float64
			}{{TwoSided, tc.p.two}, {Greater, tc.p.greater}, {Less, tc.p.less}} {
				zt, err := TwoProportionZTest(tc.x1, tc.n1, tc.x2, tc.n2, 0.05, a.alt)
				if err != nil {
					t.Fatal(err)
				}
				near(t, "z", zt.Statistic, tc.z, 1e-12, 0)
				near(t, "p "+a.alt.String(), zt.PValue, a.want, 1e-10, 0)
				if len(zt.Warnings) != 0 {
					t.Errorf("unexpected warnings %q", zt.Warnings)
				}
			}
			wd, err := WaldDifference(tc.x1, tc.n1, tc.x2, tc.n2, tc.level)
			if err != nil {
				t.Fatal(err)
			}
			nearInterval(t, "Wald difference", wd, tc.wald, 1e-12, 1e-15)
			nc, err := NewcombeDifference(tc.x1, tc.n1, tc.x2, tc.n2, tc.level)
			if err != nil {
				t.Fatal(err)
			}
			nearInterval(t, "Newcombe", nc, tc.newcombe, 1e-12, 1e-15)
			if nc.Level != tc.level {
				t.Errorf("Newcombe level %v", nc.Level)
			}
			kz, err := KatzRatio(tc.x1, tc.n1, tc.x2, tc.n2, tc.level)
			if tc.katzUndef {
				if !errors.Is(err, ErrUndefined) {
					t.Errorf("Katz: err = %v, want ErrUndefined (experiment/REFERENCE-VALUES.md: undefined)", err)
				}
			} else {
				if err != nil {
					t.Fatal(err)
				}
				nearInterval(t, "Katz", kz, tc.katz, 1e-12, 1e-15)
				// The point estimate p1/p2 lies inside (SciPy relative_risk).
				if !(kz.Lower < tc.ratio && tc.ratio < kz.Upper) {
					t.Errorf("ratio %v outside Katz interval %+v", tc.ratio, kz)
				}
			}
			wf, err := WoolfOddsRatio(tc.x1, tc.n1, tc.x2, tc.n2, tc.level)
			if tc.woolfUndef {
				if !errors.Is(err, ErrUndefined) {
					t.Errorf("Woolf: err = %v, want ErrUndefined", err)
				}
			} else {
				if err != nil {
					t.Fatal(err)
				}
				nearInterval(t, "Woolf", wf, tc.woolf, 1e-12, 1e-15)
			}
		})
	}
}

// TestPooledUndefined covers P2-05 and P2-06 (no conversions in either arm),
// where R and statsmodels return NaN for z (experiment/REFERENCE-VALUES.md
// section 14, "Undefined cases"), and the mirror case with every unit
// converting. armtally reports z = 0, p = 1 and a warning instead.
func TestPooledUndefined(t *testing.T) {
	cases := []struct {
		id             string
		x1, n1, x2, n2 int64
		newcombe       [2]float64
		hasNewcombe    bool
		why            string
	}{
		{"P2-05", 0, 10, 0, 20, [2]float64{-0.1611251580528193, 0.27753279986288915}, true, "no unit converted"},  // Newcombe: experiment/REFERENCE-VALUES.md P2-05 (R Wilson limits)
		{"P2-06", 0, 10, 0, 10, [2]float64{-0.27753279986288915, 0.27753279986288915}, true, "no unit converted"}, // Newcombe: experiment/REFERENCE-VALUES.md P2-06
		{"all converted", 10, 10, 20, 20, [2]float64{}, false, "every unit converted"},
		{"n=1 both", 1, 1, 1, 1, [2]float64{}, false, "every unit converted"},
	}
	for _, tc := range cases {
		t.Run(tc.id, func(t *testing.T) {
			for _, alt := range []Alternative{TwoSided, Greater, Less} {
				zt, err := TwoProportionZTest(tc.x1, tc.n1, tc.x2, tc.n2, 0.05, alt)
				if err != nil {
					t.Fatal(err)
				}
				if zt.Statistic != 0 || zt.PValue != 1 || zt.RejectByPValue || zt.RejectByStatistic {
					t.Errorf("%v: got %+v, want z=0, p=1, no rejection", alt, zt)
				}
				if len(zt.Warnings) != 1 || !strings.Contains(zt.Warnings[0], tc.why) {
					t.Errorf("warnings %q, want one saying %q", zt.Warnings, tc.why)
				}
			}
			wd, err := WaldDifference(tc.x1, tc.n1, tc.x2, tc.n2, 0.95)
			if err != nil {
				t.Fatal(err)
			}
			if wd.Lower != 0 || wd.Upper != 0 { // experiment/REFERENCE-VALUES.md P2-05/06 Wald CI [0, 0] (R prop.test)
				t.Errorf("Wald difference %+v, want [0, 0]", wd)
			}
			if tc.hasNewcombe {
				nc, err := NewcombeDifference(tc.x1, tc.n1, tc.x2, tc.n2, 0.95)
				if err != nil {
					t.Fatal(err)
				}
				nearInterval(t, "Newcombe", nc, tc.newcombe, 1e-12, 1e-15)
			}
			if _, err := KatzRatio(tc.x1, tc.n1, tc.x2, tc.n2, 0.95); tc.x1 == 0 && !errors.Is(err, ErrUndefined) {
				t.Errorf("Katz err = %v, want ErrUndefined", err)
			}
		})
	}
}

// TestPublishedNewcombe checks Newcombe (1998), Stat Med 17:873-890, Table
// II, examples (a)-(h), method 10, at the published 4 decimals (abs 5e-5),
// experiment/REFERENCE-VALUES.md section 13 (from memory; agree with R there).
func TestPublishedNewcombe(t *testing.T) {
	cases := []struct {
		id             string
		x1, n1, x2, n2 int64
		want           [2]float64
	}{
		{"P2-01 (a)", 56, 70, 48, 80, [2]float64{0.0524, 0.3339}},
		{"P2-02 (b)", 9, 10, 3, 10, [2]float64{0.1705, 0.8090}},
		{"P2-03 (c)", 6, 7, 2, 7, [2]float64{0.0582, 0.8062}},
		{"P2-04 (d)", 5, 56, 0, 29, [2]float64{-0.0381, 0.1926}},
		{"P2-05 (e)", 0, 10, 0, 20, [2]float64{-0.1611, 0.2775}},
		{"P2-06 (f)", 0, 10, 0, 10, [2]float64{-0.2775, 0.2775}},
		{"P2-07 (g)", 10, 10, 0, 20, [2]float64{0.6791, 1.0000}},
		{"P2-08 (h)", 10, 10, 0, 10, [2]float64{0.6075, 1.0000}},
	}
	for _, tc := range cases {
		t.Run(tc.id, func(t *testing.T) {
			nc, err := NewcombeDifference(tc.x1, tc.n1, tc.x2, tc.n2, 0.95)
			if err != nil {
				t.Fatal(err)
			}
			nearInterval(t, "Newcombe", nc, tc.want, 0, 5e-5)
		})
	}
}

func TestTwoProportionZTestBadInput(t *testing.T) {
	if _, err := TwoProportionZTest(1, 0, 1, 2, 0.05, TwoSided); !errors.Is(err, ErrBadCount) {
		t.Errorf("n1 = 0: err = %v", err)
	}
	if _, err := TwoProportionZTest(1, 2, 3, 2, 0.05, TwoSided); !errors.Is(err, ErrBadCount) || !strings.Contains(err.Error(), "control") {
		t.Errorf("x2 > n2: err = %v, want ErrBadCount naming the control", err)
	}
	for _, a := range []float64{0, 1, -0.5} {
		if _, err := TwoProportionZTest(1, 2, 1, 2, a, TwoSided); !errors.Is(err, ErrBadParameter) {
			t.Errorf("alpha %v: err = %v", a, err)
		}
	}
	if _, err := TwoProportionZTest(1, 2, 1, 2, 0.05, Alternative(7)); !errors.Is(err, ErrBadParameter) {
		t.Errorf("bad alternative: err = %v", err)
	}
}
