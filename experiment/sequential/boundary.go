package sequential

import (
	"fmt"
	"math"
)

// Sides says which boundaries a group-sequential test has.
type Sides int

const (
	// OneSided has an upper efficacy boundary only: the test rejects when
	// Z_j >= c_j (Z positive when the treatment is ahead; a caller testing
	// the other direction negates Z).
	OneSided Sides = iota + 1
	// TwoSided has symmetric efficacy boundaries: the test rejects when
	// |Z_j| >= c_j, and under the null hypothesis each tail spends half of
	// each increment of alpha.
	TwoSided
)

// String returns "one-sided" or "two-sided".
func (s Sides) String() string {
	switch s {
	case OneSided:
		return "one-sided"
	case TwoSided:
		return "two-sided"
	}
	return fmt.Sprintf("Sides(%d)", int(s))
}

// Look is the efficacy boundary of one look.
type Look struct {
	// Fraction is the information fraction t_j as given (it may exceed 1
	// at an overrun).
	Fraction float64
	// Critical is c_j on the z scale; +Inf when the look has no alpha to
	// spend (an overrun after t = 1, or an increment below the smallest
	// positive float).
	Critical float64
	// NominalP is the p-value of a fixed-horizon z test at the boundary:
	// 1 - Phi(c_j) one-sided, 2 (1 - Phi(c_j)) two-sided; a look crosses
	// exactly when its fixed-horizon p-value is at most NominalP.
	NominalP float64
	// Spent is the cumulative alpha spent through this look, alpha(min(t_j, 1)).
	Spent float64
	// Increment is alpha(t_j) - alpha(t_{j-1}), the probability under the
	// null hypothesis of first crossing at this look.
	Increment float64
}

// Boundary is a group-sequential efficacy boundary: one Look per look.
type Boundary struct {
	Spending Spending
	Sides    Sides
	Looks    []Look
}

// gridR is Jennison and Turnbull's grid size parameter r: each look's grid
// has at most 6r - 1 points before the midpoints are added (more after a
// small step, see lookR). At r = 64 the critical values move by less than
// 1e-7 on a grid four times finer (TestGridConvergence) and agree with
// rpact within 1e-6; Jennison and Turnbull recommend r >= 16.
const gridR = 64

// Boundaries computes the group-sequential efficacy boundaries of the
// spending function sp for looks at the information fractions t_1 < ... <
// t_k (uneven spacing allowed; t_k may be below 1, or above 1 at an
// overrun, where the spending is capped at alpha(1) = alpha).
//
// The look statistics Z_1, ..., Z_k are taken as jointly normal with unit
// variances and Cov(Z_i, Z_j) = sqrt(t_i / t_j) for i <= j (the canonical
// joint distribution: Z_j = S_j / sqrt(I_j) with S_j a sum of independent
// normal increments, Jennison and Turnbull 2000, section 3.1). The critical
// value c_j is the root of
//
//	P_0(no crossing at looks 1..j-1, crossing at look j) = alpha(t_j) - alpha(t_{j-1}),
//
// where a crossing is Z >= c one-sided and |Z| >= c two-sided (each tail
// then takes half of the increment, by the symmetry of the null
// distribution). The probability is computed by numerical integration of
// the recursive density of the statistics that have not crossed
// (Armitage, McPherson and Rowe 1969), on Jennison and Turnbull's grid
// with Simpson's rule (chapter 19); the root is found by bisection. c_j
// depends only on t_1..t_j and the earlier boundaries, so a monitoring run
// can compute each night's boundary from the looks taken so far, and
// earlier boundaries never change when a look is added.
//
// References: P. Armitage, C. K. McPherson and B. C. Rowe (1969), Repeated
// significance tests on accumulating data, Journal of the Royal
// Statistical Society A 132(2), 235-244; C. Jennison and B. W. Turnbull
// (2000), Group Sequential Methods with Applications to Clinical Trials,
// Chapman & Hall/CRC, chapters 7 and 19; K. K. G. Lan and D. L. DeMets
// (1983), Biometrika 70(3), 659-663.
func Boundaries(sp Spending, sides Sides, fractions []float64) (Boundary, error) {
	return boundaries(sp, sides, fractions, gridR)
}

// boundaries is Boundaries on a grid of size parameter r.
func boundaries(sp Spending, sides Sides, fractions []float64, r int) (Boundary, error) {
	if err := sp.Check(); err != nil {
		return Boundary{}, err
	}
	if sides != OneSided && sides != TwoSided {
		return Boundary{}, fmt.Errorf("%w: unknown sides %d", ErrBadSetting, int(sides))
	}
	if err := checkFractions(fractions); err != nil {
		return Boundary{}, err
	}
	b := Boundary{Spending: sp, Sides: sides, Looks: make([]Look, len(fractions))}
	var prev *density
	spentBefore := 0.0
	for j, t := range fractions {
		spent := sp.Spent(t)
		inc := math.Max(spent-spentBefore, 0)
		target := inc
		if sides == TwoSided {
			target = inc / 2
		}
		floor := -20.0
		if sides == TwoSided {
			floor = 0
		}
		prev = prev.refined(lookR(prev, t, r))
		c := solveCritical(prev, t, target, floor)
		lo := math.Inf(-1)
		if sides == TwoSided {
			lo = -c
		}
		prev = next(prev, t, lo, c, 0, r)
		b.Looks[j] = Look{Fraction: t, Critical: c, NominalP: nominalP(c, sides), Spent: spent, Increment: inc}
		spentBefore = spent
	}
	return b, nil
}

func checkFractions(fractions []float64) error {
	if len(fractions) == 0 {
		return fmt.Errorf("%w: no looks", ErrBadSetting)
	}
	for j, t := range fractions {
		if !(t > 0) || math.IsInf(t, 0) {
			return fmt.Errorf("%w: information fraction %v at look %d is not positive and finite", ErrBadSetting, t, j+1)
		}
		if j > 0 && !(t > fractions[j-1]) {
			return fmt.Errorf("%w: information fraction %v at look %d does not exceed %v at look %d", ErrBadSetting, t, j+1, fractions[j-1], j)
		}
	}
	return nil
}

func nominalP(c float64, sides Sides) float64 {
	p := upperTail(c)
	if sides == TwoSided {
		p *= 2
	}
	return p
}

// upperTail is 1 - Phi(x), accurate in the far tail.
func upperTail(x float64) float64 {
	return 0.5 * math.Erfc(x/math.Sqrt2)
}

// Crossed reports whether the statistic z at look j (1-based) is on or
// beyond that look's boundary: z >= c_j one-sided, |z| >= c_j two-sided.
// It returns false for a look the boundary does not have.
func (b Boundary) Crossed(j int, z float64) bool {
	if j < 1 || j > len(b.Looks) || math.IsNaN(z) {
		return false
	}
	c := b.Looks[j-1].Critical
	if b.Sides == TwoSided {
		return math.Abs(z) >= c
	}
	return z >= c
}

// FirstCrossing returns the first look (1-based) whose statistic zs[j-1]
// crossed the boundary, or 0 when none did. zs may be shorter than the
// boundary (the looks taken so far).
func (b Boundary) FirstCrossing(zs []float64) int {
	for j := range zs {
		if b.Crossed(j+1, zs[j]) {
			return j + 1
		}
	}
	return 0
}

// CrossingProbabilities returns, for boundaries c_1..c_k at the
// information fractions t_1..t_k, the probabilities of first crossing the
// upper boundary (Z_j >= c_j) and, two-sided, the lower one (Z_j <= -c_j)
// at each look when the statistics have drift theta: E[Z_j] = theta
// sqrt(t_j) (theta is the standardized effect times the square root of the
// information at t = 1). One-sided, lower is all zeros. With theta = 0 and
// the boundaries of Boundaries, upper + lower is each look's Increment;
// with theta > 0 their sum is the power. It uses the same recursive
// numerical integration as Boundaries (Armitage, McPherson and Rowe 1969;
// Jennison and Turnbull 2000, chapter 19). An infinite critical value is
// never crossed.
func CrossingProbabilities(sides Sides, fractions, critical []float64, theta float64) (upper, lower []float64, err error) {
	if sides != OneSided && sides != TwoSided {
		return nil, nil, fmt.Errorf("%w: unknown sides %d", ErrBadSetting, int(sides))
	}
	if err := checkFractions(fractions); err != nil {
		return nil, nil, err
	}
	if len(critical) != len(fractions) {
		return nil, nil, fmt.Errorf("%w: %d critical values for %d looks", ErrBadSetting, len(critical), len(fractions))
	}
	if math.IsNaN(theta) || math.IsInf(theta, 0) {
		return nil, nil, fmt.Errorf("%w: drift %v", ErrBadSetting, theta)
	}
	upper = make([]float64, len(fractions))
	lower = make([]float64, len(fractions))
	var prev *density
	for j, t := range fractions {
		c := critical[j]
		if math.IsNaN(c) || (sides == TwoSided && c < 0) {
			return nil, nil, fmt.Errorf("%w: critical value %v at look %d", ErrBadSetting, c, j+1)
		}
		lo := math.Inf(-1)
		prev = prev.refined(lookR(prev, t, gridR))
		upper[j] = crossAbove(prev, t, c, theta)
		if sides == TwoSided {
			lo = -c
			// P(Z_j <= -c) under drift theta is P(Z_j >= c) under -theta
			// for a symmetric continuation region.
			lower[j] = crossAbove(prev.mirror(), t, c, -theta)
		}
		prev = next(prev, t, lo, c, theta, gridR)
	}
	return upper, lower, nil
}
