package stats

import (
	"errors"
	"testing"
)

// Single-proportion intervals, experiment/REFERENCE-VALUES.md section 6.
// Wilson: R 4.2.2 stats::prop.test(x, n, correct=FALSE)$conf.int;
// Clopper-Pearson: R 4.2.2 stats::binom.test(x, n)$conf.int; Wald and
// Agresti-Coull (clipped): statsmodels 0.13.5
// proportion_confint(method='normal' / 'agresti_coull'). Tolerances as
// suggested there: rel 1e-12 abs 1e-15, Clopper-Pearson rel 1e-9.
func TestSingleProportionIntervals(t *testing.T) {
	tests := []struct {
		id         string
		x, n       int64
		level      float64
		wilson, cp [2]float64
		wald, ac   [2]float64
	}{
		{"CI-01", 81, 263, 0.95,
			[2]float64{0.2552885198782743, 0.36620957698280016}, // CI-01 Wilson, R prop.test
			[2]float64{0.2527367455852712, 0.3676219226013514},  // CI-01 Clopper-Pearson, R binom.test
			[2]float64{0.2521901262131072, 0.36377945553594226}, // CI-01 Wald, statsmodels
			[2]float64{0.25522066518999675, 0.3662774316710775}, // CI-01 Agresti-Coull, statsmodels
		},
		{"CI-02", 0, 20, 0.95,
			[2]float64{0, 0.1611251580528193},
			[2]float64{0, 0.16843347098308536},
			[2]float64{0, 0},
			[2]float64{0, 0.18980956054248885},
		},
		{"CI-03", 0, 1, 0.95,
			[2]float64{0, 0.7934506856227626},
			[2]float64{0, 0.975},
			[2]float64{0, 0},
			[2]float64{0, 0.832500514520587},
		},
		{"CI-04", 1, 1, 0.95,
			[2]float64{0.2065493143772375, 1},
			[2]float64{0.025000000000000022, 1},
			[2]float64{1, 1},
			[2]float64{0.167499485479413, 1},
		},
		{"CI-05", 10, 10, 0.95,
			[2]float64{0.7224672001371109, 1},
			[2]float64{0.6915028921812392, 1},
			[2]float64{1, 1},
			[2]float64{0.6791126942494543, 1},
		},
		{"CI-06", 3, 7, 0.95,
			[2]float64{0.1582198552514697, 0.7495416354723426},
			[2]float64{0.09898827844250789, 0.815948432359917},
			[2]float64{0.06197210944726306, 0.795170747695594},
			[2]float64{0.15752124573939857, 0.7502402449844139},
		},
		{"CI-07", 2, 50, 0.95,
			[2]float64{0.01103888432761982, 0.1346009068750702},
			[2]float64{0.004881433426164378, 0.13713762560396736},
			[2]float64{0, 0.09431611523565624},
			[2]float64{0.003413936544708507, 0.14222585465798152},
		},
		{"CI-08", 500, 1000, 0.9,
			[2]float64{0.4740276914784201, 0.5259723085215798},
			[2]float64{0.4735177312356912, 0.5264822687643088},
			[2]float64{0.4739925806062221, 0.5260074193937779},
			[2]float64{0.4740276914784201, 0.5259723085215798},
		},
		{"CI-09", 500, 1000, 0.99,
			[2]float64{0.4594070052120849, 0.5405929947879152},
			[2]float64{0.458852553307045, 0.541147446692955},
			[2]float64{0.4592725626849012, 0.5407274373150988},
			[2]float64{0.45940700521208483, 0.5405929947879151},
		},
		{"CI-10", 20000, 2000000, 0.95,
			[2]float64{0.009863042386887755, 0.010138839924318974},
			[2]float64{0.009862564118097987, 0.010138857499939369},
			[2]float64{0.009862104310573406, 0.010137895689426595},
			[2]float64{0.009863039175249746, 0.010138843135956983},
		},
		{"CI-11", 1, 2000000, 0.95,
			[2]float64{8.826228292013074e-08, 2.832461517506828e-06},
			[2]float64{1.265890391202103e-08, 2.7858185115256983e-06}, // R binom.test (SciPy differs, section 14)
			[2]float64{0, 1.4799817472744982e-06},
			[2]float64{0, 3.1351605650333774e-06},
		},
		{"CI-12", 1999999, 2000000, 0.95,
			[2]float64{0.9999971675384826, 0.9999999117377171},
			[2]float64{0.9999972141814885, 0.9999999873410961},
			[2]float64{0.9999985200182528, 1},
			[2]float64{0.9999968648394351, 1},
		},
	}
	for _, tc := range tests {
		t.Run(tc.id, func(t *testing.T) {
			w, err := Wilson(tc.x, tc.n, tc.level)
			if err != nil {
				t.Fatal(err)
			}
			nearInterval(t, "Wilson", w, tc.wilson, 1e-12, 1e-15)
			if w.Level != tc.level || w.Method != "Wilson score" {
				t.Errorf("Wilson level/method = %v %q", w.Level, w.Method)
			}
			cp, err := ClopperPearson(tc.x, tc.n, tc.level)
			if err != nil {
				t.Fatal(err)
			}
			nearInterval(t, "Clopper-Pearson", cp, tc.cp, 1e-9, 1e-15)
			wd, err := WaldInterval(tc.x, tc.n, tc.level)
			if err != nil {
				t.Fatal(err)
			}
			nearInterval(t, "Wald", wd, tc.wald, 1e-12, 1e-15)
			ac, err := AgrestiCoull(tc.x, tc.n, tc.level)
			if err != nil {
				t.Fatal(err)
			}
			nearInterval(t, "Agresti-Coull", ac, tc.ac, 1e-12, 1e-15)
		})
	}
}

// TestIntervalBoundaries checks the exact ends experiment/REFERENCE-VALUES.md
// section 6 and section 14 ("Wilson at the ends") require: exactly 0 at x = 0
// and exactly 1 at x = n, as R returns.
func TestIntervalBoundaries(t *testing.T) {
	for _, n := range []int64{1, 2, 7, 20, 1000, 2000000} {
		for _, f := range []struct {
			name string
			fn   func(x, n int64, level float64) (Interval, error)
		}{{"Wilson", Wilson}, {"ClopperPearson", ClopperPearson}} {
			lo, err := f.fn(0, n, 0.95)
			if err != nil {
				t.Fatal(err)
			}
			hi, err := f.fn(n, n, 0.95)
			if err != nil {
				t.Fatal(err)
			}
			if lo.Lower != 0 || hi.Upper != 1 {
				t.Errorf("%s n=%d: lower at x=0 is %v, upper at x=n is %v; want exactly 0 and 1", f.name, n, lo.Lower, hi.Upper)
			}
			if !(lo.Upper > 0 && lo.Upper < 1 && hi.Lower > 0 && hi.Lower < 1) {
				t.Errorf("%s n=%d: other ends %v, %v not inside (0, 1)", f.name, n, lo.Upper, hi.Lower)
			}
		}
	}
}

// TestPublishedSingleProportion checks the published 4-decimal values of
// experiment/REFERENCE-VALUES.md section 13 with abs 5e-5.
func TestPublishedSingleProportion(t *testing.T) {
	w, _ := Wilson(81, 263, 0.95)
	nearInterval(t, "CI-01 Wilson", w, [2]float64{0.2553, 0.3662}, 0, 5e-5) // Newcombe 1998 (Stat Med 17:857-872), Table I, 81/263, method 3; from memory
	cp, _ := ClopperPearson(81, 263, 0.95)
	nearInterval(t, "CI-01 Clopper-Pearson", cp, [2]float64{0.2527, 0.3676}, 0, 5e-5) // Newcombe 1998 (Stat Med 17:857-872), Table I, 81/263, method 5; from memory
	w, _ = Wilson(0, 20, 0.95)
	nearInterval(t, "CI-02 Wilson", w, [2]float64{0, 0.1611}, 0, 5e-5) // Newcombe 1998 (Stat Med 17:857-872), Table I, 0/20, method 3; from memory
	cp, _ = ClopperPearson(0, 20, 0.95)
	nearInterval(t, "CI-02 Clopper-Pearson", cp, [2]float64{0, 0.1684}, 0, 5e-5) // Newcombe 1998 (Stat Med 17:857-872), Table I, 0/20, method 5; from memory
}

func TestIntervalBadInput(t *testing.T) {
	type fn1 = func(x, n int64, level float64) (Interval, error)
	one := map[string]fn1{"Wilson": Wilson, "ClopperPearson": ClopperPearson, "AgrestiCoull": AgrestiCoull, "WaldInterval": WaldInterval}
	for name, f := range one {
		for _, c := range []struct{ x, n int64 }{{0, 0}, {-1, 5}, {6, 5}, {0, -3}} {
			if _, err := f(c.x, c.n, 0.95); !errors.Is(err, ErrBadCount) {
				t.Errorf("%s(%d, %d): err = %v, want ErrBadCount", name, c.x, c.n, err)
			}
		}
		for _, lv := range []float64{0, 1, 1.5, -0.1} {
			if _, err := f(1, 5, lv); !errors.Is(err, ErrBadParameter) {
				t.Errorf("%s level %v: err = %v, want ErrBadParameter", name, lv, err)
			}
		}
	}
	type fn2 = func(x1, n1, x2, n2 int64, level float64) (Interval, error)
	two := map[string]fn2{"NewcombeDifference": NewcombeDifference, "WaldDifference": WaldDifference, "KatzRatio": KatzRatio, "WoolfOddsRatio": WoolfOddsRatio}
	for name, f := range two {
		for _, c := range [][4]int64{{0, 0, 1, 2}, {1, 2, 0, 0}, {3, 2, 1, 2}, {1, 2, -1, 2}} {
			if _, err := f(c[0], c[1], c[2], c[3], 0.95); !errors.Is(err, ErrBadCount) {
				t.Errorf("%s%v: err = %v, want ErrBadCount", name, c, err)
			}
		}
	}
}
