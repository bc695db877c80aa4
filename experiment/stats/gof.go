package stats

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// GoodnessOfFit is the result of a chi-square goodness-of-fit test.
type GoodnessOfFit struct {
	// Method is the test's name as the readout prints it.
	Method    string
	Statistic float64
	DF        int
	// PValue is the upper tail P(chi-square(DF) >= Statistic), computed
	// directly from the complemented incomplete gamma function.
	PValue float64
	// Expected holds the expected count of each category, in input order.
	Expected []float64
}

// ChiSquareGoodnessOfFit returns Pearson's chi-square goodness-of-fit test
// of observed counts against planned shares, armtally's sample ratio check:
//
//	N = sum O_i, E_i = N s_i / sum s,  X^2 = sum (O_i - E_i)^2 / E_i
//	df = k - 1,  p = P(chi-square(df) >= X^2)
//
// H0: units fall into the k arms with the planned shares; H1: they do not.
// The shares are normalized to sum 1. Common practice flags a sample ratio
// mismatch at p < 0.001.
//
// The chi-square approximation needs every expected count to be at least
// about 5; with the thousands of units of a typical experiment it always
// holds. For tiny tallies the test is only indicative.
//
// Special cases: observed counts equal to the expected ones give X^2 = 0
// and p = 1; an arm with 0 units is an ordinary case. Fewer than two
// categories, a different number of shares, a share <= 0 (or not finite),
// a negative count or a total of 0 is an error wrapping [ErrBadCount] or
// [ErrBadParameter].
//
// References:
//
//  1. Pearson K (1900). On the criterion that a given system of deviations
//     from the probable in the case of a correlated system of variables is
//     such that it can be reasonably supposed to have arisen from random
//     sampling. Philosophical Magazine 50(302):157-175.
func ChiSquareGoodnessOfFit(observed []int64, shares []float64) (GoodnessOfFit, error) {
	const method = "Pearson chi-square goodness of fit"
	if len(observed) < 2 {
		return GoodnessOfFit{}, fmt.Errorf("chi-square goodness of fit: %w: %d categories, want at least 2", ErrBadParameter, len(observed))
	}
	if len(shares) != len(observed) {
		return GoodnessOfFit{}, fmt.Errorf("chi-square goodness of fit: %w: %d shares for %d categories", ErrBadParameter, len(shares), len(observed))
	}
	var total int64
	var sumShares float64
	for i, o := range observed {
		if o < 0 {
			return GoodnessOfFit{}, fmt.Errorf("chi-square goodness of fit: %w: category %d has %d units", ErrBadCount, i+1, o)
		}
		total += o
		s := shares[i]
		if !(s > 0) || math.IsInf(s, 0) {
			return GoodnessOfFit{}, fmt.Errorf("chi-square goodness of fit: %w: share %v of category %d, want a positive number", ErrBadParameter, s, i+1)
		}
		sumShares += s
	}
	if total == 0 {
		return GoodnessOfFit{}, fmt.Errorf("chi-square goodness of fit: %w: no units in any category", ErrBadCount)
	}
	n := float64(total)
	expected := make([]float64, len(observed))
	var x2 float64
	for i, o := range observed {
		e := n * (shares[i] / sumShares)
		expected[i] = e
		d := float64(o) - e
		x2 += d * d / e
	}
	df := len(observed) - 1
	p := distuv.ChiSquared{K: float64(df)}.Survival(x2)
	return GoodnessOfFit{Method: method, Statistic: x2, DF: df, PValue: clip(p, 0, 1), Expected: expected}, nil
}
