package stats

import (
	"errors"
	"testing"
)

// Sample ratio check, experiment/REFERENCE-VALUES.md section 10: R 4.2.2
// stats::chisq.test(x, p = ...) [= SciPy chisquare]; statistic rel 1e-12,
// df exact, p rel 1e-9.
func TestChiSquareGoodnessOfFit(t *testing.T) {
	tests := []struct {
		id       string
		counts   []int64
		shares   []float64
		x2       float64
		df       int
		p        float64
		mismatch bool // p < 0.001, common practice
	}{
		{"SRM-01", []int64{50120, 49880}, []float64{0.5, 0.5}, 0.576, 1, 0.447884478264112, false},
		{"SRM-02", []int64{50600, 49400}, []float64{0.5, 0.5}, 14.4, 1, 0.00014780231033445406, true},
		{"SRM-03", []int64{34210, 33050, 32740}, []float64{0.34, 0.33, 0.33}, 3.421301247771836, 2, 0.18074815528527863, false},
		{"SRM-04", []int64{9040, 960}, []float64{0.9, 0.1}, 1.777777777777778, 1, 0.1824224394517358, false},
		{"SRM-05", []int64{1000, 1000, 1000}, []float64{1.0 / 3, 1.0 / 3, 1.0 / 3}, 0, 2, 1, false},
		{"SRM-06", []int64{2513, 2470, 2498, 2519}, []float64{0.25, 0.25, 0.25, 0.25}, 0.5736, 3, 0.9024485460117135, false},
		{"SRM-07", []int64{51581, 48419}, []float64{0.5, 0.5}, 99.98244, 1, 1.5375424071315936e-23, true},
	}
	for _, tc := range tests {
		t.Run(tc.id, func(t *testing.T) {
			g, err := ChiSquareGoodnessOfFit(tc.counts, tc.shares)
			if err != nil {
				t.Fatal(err)
			}
			near(t, "X-squared", g.Statistic, tc.x2, 1e-12, 1e-20)
			if g.DF != tc.df {
				t.Errorf("df = %d, want %d", g.DF, tc.df)
			}
			near(t, "p", g.PValue, tc.p, 1e-9, 0)
			if (g.PValue < 0.001) != tc.mismatch {
				t.Errorf("mismatch at p < 0.001: p = %v", g.PValue)
			}
			if len(g.Expected) != len(tc.counts) {
				t.Fatalf("expected counts %v", g.Expected)
			}
		})
	}
	// Shares need not sum to 1: 2:1 gives the same as 2/3, 1/3 (hand
	// arithmetic: 300 units, E = 200, 100, X^2 = 100/200 + 100/100 = 1.5).
	g, err := ChiSquareGoodnessOfFit([]int64{190, 110}, []float64{2, 1})
	if err != nil {
		t.Fatal(err)
	}
	near(t, "unnormalized shares", g.Statistic, 1.5, 1e-12, 0)
	near(t, "expected[0]", g.Expected[0], 200, 1e-12, 0)

	bad := []struct {
		counts []int64
		shares []float64
		want   error
	}{
		{[]int64{10}, []float64{1}, ErrBadParameter},
		{[]int64{10, 10}, []float64{1}, ErrBadParameter},
		{[]int64{10, 10}, []float64{1, 0}, ErrBadParameter},
		{[]int64{10, 10}, []float64{1, -1}, ErrBadParameter},
		{[]int64{0, 0}, []float64{1, 1}, ErrBadCount},
		{[]int64{-1, 5}, []float64{1, 1}, ErrBadCount},
	}
	for _, b := range bad {
		if _, err := ChiSquareGoodnessOfFit(b.counts, b.shares); !errors.Is(err, b.want) {
			t.Errorf("%v %v: err = %v, want %v", b.counts, b.shares, err, b.want)
		}
	}
}
