package stats

import (
	"math"
	"testing"
)

// BenchmarkReadoutStats times each statistic a readout computes for one
// comparison, on counts of a typical size. Compare runs with benchstat.
//
// Each case returns one number of its result, which must lie in [lo, hi]
// (a p-value in [0, 1], a limit of a rate in [0, 1], a limit of a
// difference in [-1, 1], a positive sample size): a result that is NaN, an
// infinity or out of range fails the benchmark, so a broken function
// cannot look fast.
func BenchmarkReadoutStats(b *testing.B) {
	// Ten p-values of a readout with many comparisons (made up for the
	// benchmark, unsorted, with a tie).
	pValues := []float64{0.041, 0.0007, 0.31, 0.012, 0.88, 0.012, 0.049, 0.2, 0.0031, 0.67}
	cases := []struct {
		name   string
		lo, hi float64
		run    func() (float64, error)
	}{
		{"Wilson", 0, 1, func() (float64, error) {
			ci, err := Wilson(10_450, 100_000, 0.95)
			return ci.Lower, err
		}},
		{"NewcombeDifference", -1, 1, func() (float64, error) {
			ci, err := NewcombeDifference(10_450, 100_000, 10_000, 100_000, 0.95)
			return ci.Lower, err
		}},
		{"TwoProportionZTest", 0, 1, func() (float64, error) {
			z, err := TwoProportionZTest(10_450, 100_000, 10_000, 100_000, 0.05, TwoSided)
			return z.PValue, err
		}},
		// Fisher's exact test on a 2x2 table of about 100 units, the size
		// at which the readout falls back to it ...
		{"FisherExact/n=100", 0, 1, func() (float64, error) {
			r, err := FisherExact(7, 50, 2, 50, 0.05, TwoSided)
			return r.PValue, err
		}},
		// ... and of about 200,000 units with rare conversions.
		{"FisherExact/n=200000", 0, 1, func() (float64, error) {
			r, err := FisherExact(130, 100_000, 100, 100_000, 0.05, TwoSided)
			return r.PValue, err
		}},
		{"OneProportionZTest", 0, 1, func() (float64, error) {
			z, err := OneProportionZTest(10_450, 100_000, 0.10, 0.05, TwoSided)
			return z.PValue, err
		}},
		{"AdjustPValues/Holm/m=10", 0, 1, func() (float64, error) {
			p, err := AdjustPValues(pValues, Holm)
			return p[0], err
		}},
		{"AdjustPValues/BH/m=10", 0, 1, func() (float64, error) {
			p, err := AdjustPValues(pValues, BenjaminiHochberg)
			return p[0], err
		}},
		{"SampleSizePerArm", 1, math.MaxInt64, func() (float64, error) {
			n, err := SampleSizePerArm(0.10, 0.11, 0.05, 0.8, TwoSided)
			return float64(n), err
		}},
		{"DetectableRate", 0, 1, func() (float64, error) {
			return DetectableRate(50_000, 0.10, 0.05, 0.8, TwoSided)
		}},
		{"SampleRatioCheck/arms=3", 0, 1, func() (float64, error) {
			g, err := ChiSquareGoodnessOfFit([]int64{33_410, 33_120, 33_470}, []float64{1, 1, 1})
			return g.PValue, err
		}},
	}
	for _, c := range cases {
		b.Run(c.name, func(b *testing.B) {
			b.ReportAllocs()
			var got float64
			var err error
			for b.Loop() {
				got, err = c.run()
			}
			if err != nil {
				b.Fatal(err)
			}
			if math.IsNaN(got) || got < c.lo || got > c.hi {
				b.Fatalf("result %v, want a value in [%v, %v]", got, c.lo, c.hi)
			}
		})
	}
}
