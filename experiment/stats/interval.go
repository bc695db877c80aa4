package stats

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mathext"
)

// Interval is a two-sided confidence interval.
type Interval struct {
	Lower, Upper float64
	// Level is the confidence level delivered, e.g. 0.95.
	Level float64
	// Method is the method's name as the readout prints it.
	Method string
}

func checkLevel(level float64) error { return checkOpen("confidence level", level) }

// wilsonLimits returns the Wilson score limits of x out of n at critical
// value z, in the form R's prop.test uses, with exact 0 at x = 0 and exact
// 1 at x = n.
func wilsonLimits(x, n int64, z float64) (lo, hi float64) {
	nf := float64(n)
	p := float64(x) / nf
	z22n := z * z / (2 * nf)
	half := z * math.Sqrt(rateVar(x, n)/nf+z22n/(2*nf))
	den := 1 + 2*z22n
	lo, hi = 0, 1
	if x > 0 {
		lo = (p + z22n - half) / den
	}
	if x < n {
		hi = (p + z22n + half) / den
	}
	return clip(lo, 0, 1), clip(hi, 0, 1)
}

// Wilson returns the Wilson score interval for a proportion x/n, the set of
// p0 that a two-sided score test (z computed with p0 in the variance) does
// not reject at level 1 - level:
//
//	p = x/n, z = z_{1 - (1-level)/2}
//	(p + z^2/(2n) -/+ z sqrt(p(1-p)/n + z^2/(4n^2))) / (1 + z^2/n)
//
// It assumes n independent units with a common conversion probability. It
// keeps close to its nominal coverage even for small n and rates near 0 or
// 1, where the Wald interval fails; for a guaranteed (conservative)
// coverage use [ClopperPearson].
//
// Special cases: x = 0 gives a lower limit of exactly 0 and x = n an upper
// limit of exactly 1 (as R's prop.test does); n = 1 gives [0, 0.7935] or
// [0.2065, 1] at 95%; n <= 0, x < 0 or x > n is an error wrapping
// [ErrBadCount]; a level outside (0, 1) is an error wrapping
// [ErrBadParameter].
//
// References:
//
//  1. Wilson EB (1927). Probable inference, the law of succession, and
//     statistical inference. Journal of the American Statistical
//     Association 22(158):209-212.
//  2. Newcombe RG (1998). Two-sided confidence intervals for the single
//     proportion: comparison of seven methods. Statistics in Medicine
//     17(8):857-872, method 3.
func Wilson(x, n int64, level float64) (Interval, error) {
	if err := checkCount(x, n); err != nil {
		return Interval{}, fmt.Errorf("wilson interval: %w", err)
	}
	if err := checkLevel(level); err != nil {
		return Interval{}, fmt.Errorf("wilson interval: %w", err)
	}
	lo, hi := wilsonLimits(x, n, zLevel(level))
	return Interval{Lower: lo, Upper: hi, Level: level, Method: "Wilson score"}, nil
}

// cpLimit solves a Clopper-Pearson limit for x conversions out of n units:
// the lower limit is the p with P(X >= x; n, p) = a, the upper the p with
// P(X <= x; n, p) = a. gonum's cephes-based InvRegIncBeta gives the start
// (its relative error reaches 1e-9 for millions of units); Newton steps on
// the accurate binomial tail, whose derivative in p is
// +/- n P(X' = x - 1 or x; n - 1, p), polish it to about 1e-14.
func cpLimit(x, n int64, a float64, upper bool) float64 {
	xf, nf := float64(x), float64(n)
	var p float64
	if upper {
		p = mathext.InvRegIncBeta(xf+1, nf-xf, 1-a)
	} else {
		p = mathext.InvRegIncBeta(xf, nf-xf+1, a)
	}
	for i := 0; i < 6; i++ {
		if !(p > 0 && p < 1) {
			break
		}
		var f, df float64
		if upper {
			f = binomTail(x, n, p, false) - a
			df = -nf * math.Exp(logDbinom(xf, nf-1, p, 1-p))
		} else {
			f = binomTail(x, n, p, true) - a
			df = nf * math.Exp(logDbinom(xf-1, nf-1, p, 1-p))
		}
		step := f / df
		if math.IsNaN(step) || math.IsInf(step, 0) {
			break
		}
		np := p - step
		if !(np > 0 && np < 1) {
			break
		}
		p = np
		if math.Abs(step) <= 1e-15*p {
			break
		}
	}
	return p
}

// ClopperPearson returns the Clopper-Pearson "exact" interval for a
// proportion x/n, the set of p0 that neither one-sided exact binomial test
// rejects at (1 - level)/2, written with beta quantiles:
//
//	a = (1 - level)/2
//	lower = B^-1(a; x, n - x + 1)       (0 when x = 0)
//	upper = B^-1(1 - a; x + 1, n - x)   (1 when x = n)
//
// The limits are solved with Newton steps on the binomial tails (which
// equal the beta distribution functions above), so they keep about 1e-14
// relative precision even for millions of units.
//
// It assumes n independent units with a common conversion probability. Its
// coverage is at least the nominal level for every p, so it is wider than
// [Wilson]; armtally offers it on request and for small counts.
//
// Special cases: x = 0 gives lower 0 and upper 1 - a^(1/n); x = n gives
// lower a^(1/n) and upper 1; n = 1 gives [0, 0.975] or [0.025, 1] at 95%;
// n <= 0, x < 0 or x > n is an error wrapping [ErrBadCount].
//
// References:
//
//  1. Clopper CJ, Pearson ES (1934). The use of confidence or fiducial
//     limits illustrated in the case of the binomial. Biometrika
//     26(4):404-413.
//  2. Newcombe RG (1998). Two-sided confidence intervals for the single
//     proportion: comparison of seven methods. Statistics in Medicine
//     17(8):857-872, method 5.
func ClopperPearson(x, n int64, level float64) (Interval, error) {
	if err := checkCount(x, n); err != nil {
		return Interval{}, fmt.Errorf("clopper-pearson interval: %w", err)
	}
	if err := checkLevel(level); err != nil {
		return Interval{}, fmt.Errorf("clopper-pearson interval: %w", err)
	}
	a := (1 - level) / 2
	lo, hi := 0.0, 1.0
	if x > 0 {
		lo = cpLimit(x, n, a, false)
	}
	if x < n {
		hi = cpLimit(x, n, a, true)
	}
	return Interval{Lower: clip(lo, 0, 1), Upper: clip(hi, 0, 1), Level: level, Method: "Clopper-Pearson exact"}, nil
}

// AgrestiCoull returns the Agresti-Coull interval for a proportion x/n, a
// Wald interval around an adjusted estimate:
//
//	z = z_{1 - (1-level)/2}, n~ = n + z^2, p~ = (x + z^2/2) / n~
//	p~ -/+ z sqrt(p~ (1 - p~) / n~), clipped to [0, 1]
//
// It uses the exact z^2, not the rounded "add two successes and two
// failures". It assumes n independent units with a common conversion
// probability; its coverage is close to nominal but it is wider than
// [Wilson] near 0 and 1, where it is clipped.
//
// Special cases: x = 0 gives a lower limit of 0 (clipped) and x = n an
// upper limit of 1 (clipped); n = 1 gives [0, 0.8325] or [0.1675, 1] at
// 95%; n <= 0, x < 0 or x > n is an error wrapping [ErrBadCount].
//
// References:
//
//  1. Agresti A, Coull BA (1998). Approximate is better than "exact" for
//     interval estimation of binomial proportions. The American
//     Statistician 52(2):119-126.
func AgrestiCoull(x, n int64, level float64) (Interval, error) {
	if err := checkCount(x, n); err != nil {
		return Interval{}, fmt.Errorf("agresti-coull interval: %w", err)
	}
	if err := checkLevel(level); err != nil {
		return Interval{}, fmt.Errorf("agresti-coull interval: %w", err)
	}
	z := zLevel(level)
	nt := float64(n) + z*z
	pt := (float64(x) + z*z/2) / nt
	half := z * math.Sqrt(pt*(1-pt)/nt)
	return Interval{Lower: clip(pt-half, 0, 1), Upper: clip(pt+half, 0, 1), Level: level, Method: "Agresti-Coull"}, nil
}

// WaldInterval returns the Wald (normal approximation) interval for a
// proportion x/n:
//
//	p = x/n, p -/+ z_{1 - (1-level)/2} sqrt(p (1 - p) / n), clipped to [0, 1]
//
// It is valid only when n p and n (1 - p) are both large (the classic rule
// asks for at least 5 each); below that its coverage collapses, and the
// readout uses [Wilson] instead. It is provided for comparison.
//
// Special cases: x = 0 gives [0, 0] and x = n gives [1, 1] (zero width: the
// estimated variance is 0); n = 1 is one of those two; n <= 0, x < 0 or
// x > n is an error wrapping [ErrBadCount].
//
// References:
//
//  1. Newcombe RG (1998). Two-sided confidence intervals for the single
//     proportion: comparison of seven methods. Statistics in Medicine
//     17(8):857-872, method 1.
func WaldInterval(x, n int64, level float64) (Interval, error) {
	if err := checkCount(x, n); err != nil {
		return Interval{}, fmt.Errorf("wald interval: %w", err)
	}
	if err := checkLevel(level); err != nil {
		return Interval{}, fmt.Errorf("wald interval: %w", err)
	}
	p := float64(x) / float64(n)
	half := zLevel(level) * math.Sqrt(rateVar(x, n)/float64(n))
	return Interval{Lower: clip(p-half, 0, 1), Upper: clip(p+half, 0, 1), Level: level, Method: "Wald"}, nil
}

// NewcombeDifference returns Newcombe's hybrid score interval for the
// difference of two independent proportions d = p1 - p2 (treatment minus
// control), built from the Wilson limits (l1, u1) and (l2, u2) of each arm:
//
//	L = d - sqrt((p1 - l1)^2 + (u2 - p2)^2)
//	U = d + sqrt((u1 - p1)^2 + (p2 - l2)^2)
//
// It assumes two independent samples of independent units. It is defined
// for every count, including zero conversions in both arms, and keeps close
// to nominal coverage where the Wald interval does not. The interval is not
// pooled while the z test is, so near the boundary the two can disagree
// about significance; the readout says so when they do.
//
// Special cases: 0 conversions in both arms gives [-u2, u1] around 0 (e.g.
// [-0.1611, 0.2775] for 0/10 vs 0/20); all units converting in arm 1 and
// none in arm 2 gives an upper limit of exactly 1; n = 1 in an arm is
// allowed; n <= 0, x < 0 or x > n in either arm is an error wrapping
// [ErrBadCount].
//
// References:
//
//  1. Newcombe RG (1998). Interval estimation for the difference between
//     independent proportions: comparison of eleven methods. Statistics in
//     Medicine 17(8):873-890, method 10.
//  2. Wilson EB (1927). Probable inference, the law of succession, and
//     statistical inference. Journal of the American Statistical
//     Association 22(158):209-212.
func NewcombeDifference(x1, n1, x2, n2 int64, level float64) (Interval, error) {
	if err := checkTwo(x1, n1, x2, n2); err != nil {
		return Interval{}, fmt.Errorf("newcombe interval: %w", err)
	}
	if err := checkLevel(level); err != nil {
		return Interval{}, fmt.Errorf("newcombe interval: %w", err)
	}
	z := zLevel(level)
	p1 := float64(x1) / float64(n1)
	p2 := float64(x2) / float64(n2)
	l1, u1 := wilsonLimits(x1, n1, z)
	l2, u2 := wilsonLimits(x2, n2, z)
	d := rateDiff(x1, n1, x2, n2)
	lo := d - math.Sqrt((p1-l1)*(p1-l1)+(u2-p2)*(u2-p2))
	hi := d + math.Sqrt((u1-p1)*(u1-p1)+(p2-l2)*(p2-l2))
	return Interval{Lower: clip(lo, -1, 1), Upper: clip(hi, -1, 1), Level: level, Method: "Newcombe hybrid score"}, nil
}

// WaldDifference returns the unpooled Wald interval for the difference of
// two independent proportions d = p1 - p2:
//
//	d -/+ z_{1 - (1-level)/2} sqrt(p1 (1 - p1)/n1 + p2 (1 - p2)/n2),
//	clipped to [-1, 1]
//
// This is the interval R's prop.test reports. It needs large counts in
// both arms (at least 5 conversions and 5 non-conversions each, by the
// classic rule); otherwise its coverage is poor and the readout uses
// [NewcombeDifference].
//
// Special cases: 0 conversions in both arms, or all units converting in
// both, gives the zero-width interval [d, d]; n = 1 in an arm contributes
// no variance; n <= 0, x < 0 or x > n in either arm is an error wrapping
// [ErrBadCount].
//
// References:
//
//  1. Newcombe RG (1998). Interval estimation for the difference between
//     independent proportions: comparison of eleven methods. Statistics in
//     Medicine 17(8):873-890, method 1.
func WaldDifference(x1, n1, x2, n2 int64, level float64) (Interval, error) {
	if err := checkTwo(x1, n1, x2, n2); err != nil {
		return Interval{}, fmt.Errorf("wald difference interval: %w", err)
	}
	if err := checkLevel(level); err != nil {
		return Interval{}, fmt.Errorf("wald difference interval: %w", err)
	}
	d := rateDiff(x1, n1, x2, n2)
	half := zLevel(level) * math.Sqrt(rateVar(x1, n1)/float64(n1)+rateVar(x2, n2)/float64(n2))
	return Interval{Lower: clip(d-half, -1, 1), Upper: clip(d+half, -1, 1), Level: level, Method: "Wald (unpooled)"}, nil
}

// KatzRatio returns the Katz log interval for the ratio of two independent
// proportions r = p1 / p2 (treatment over control); the relative lift
// interval is this interval minus 1:
//
//	se = sqrt(1/x1 - 1/n1 + 1/x2 - 1/n2)
//	exp(log(p1/p2) -/+ z_{1 - (1-level)/2} se)
//
// It assumes two independent samples and relies on the normality of
// log(p1/p2), which needs a fair number of conversions in both arms.
//
// Special cases: 0 conversions in either arm makes log(p1/p2) and se
// infinite and returns [ErrUndefined] (the readout prints "not estimable");
// all units converting in both arms gives the zero-width [r, r]; n = 1 is
// allowed (x = 1 then); n <= 0, x < 0 or x > n in either arm is an error
// wrapping [ErrBadCount].
//
// References:
//
//  1. Katz D, Baptista J, Azen SP, Pike MC (1978). Obtaining confidence
//     intervals for the risk ratio in cohort studies. Biometrics
//     34(3):469-474, method "log".
func KatzRatio(x1, n1, x2, n2 int64, level float64) (Interval, error) {
	if err := checkTwo(x1, n1, x2, n2); err != nil {
		return Interval{}, fmt.Errorf("katz ratio interval: %w", err)
	}
	if err := checkLevel(level); err != nil {
		return Interval{}, fmt.Errorf("katz ratio interval: %w", err)
	}
	if x1 == 0 || x2 == 0 {
		return Interval{}, fmt.Errorf("katz ratio interval: %w: %d and %d conversions (the log ratio needs both above 0)", ErrUndefined, x1, x2)
	}
	r := (float64(x1) / float64(n1)) / (float64(x2) / float64(n2))
	se := math.Sqrt(math.Max(0, 1/float64(x1)-1/float64(n1)+1/float64(x2)-1/float64(n2)))
	half := zLevel(level) * se
	lr := math.Log(r)
	return Interval{Lower: math.Exp(lr - half), Upper: math.Exp(lr + half), Level: level, Method: "Katz log"}, nil
}

// WoolfOddsRatio returns Woolf's logit interval for the odds ratio of the
// 2x2 table [[a, b], [c, d]] = [[x1, n1 - x1], [x2, n2 - x2]]:
//
//	OR = a d / (b c), se = sqrt(1/a + 1/b + 1/c + 1/d)
//	exp(log(OR) -/+ z_{1 - (1-level)/2} se)
//
// It relies on the normality of log(OR) and needs every cell to be
// reasonably large.
//
// Special cases: a zero cell (0 conversions or all units converting in
// either arm) makes the interval infinite and returns [ErrUndefined];
// n = 1 in an arm always leaves a zero cell; n <= 0, x < 0 or x > n in
// either arm is an error wrapping [ErrBadCount].
//
// References:
//
//  1. Woolf B (1955). On estimating the relation between blood group and
//     disease. Annals of Human Genetics 19(4):251-253.
func WoolfOddsRatio(x1, n1, x2, n2 int64, level float64) (Interval, error) {
	if err := checkTwo(x1, n1, x2, n2); err != nil {
		return Interval{}, fmt.Errorf("woolf odds ratio interval: %w", err)
	}
	if err := checkLevel(level); err != nil {
		return Interval{}, fmt.Errorf("woolf odds ratio interval: %w", err)
	}
	a, b, c, d := float64(x1), float64(n1-x1), float64(x2), float64(n2-x2)
	if a == 0 || b == 0 || c == 0 || d == 0 {
		return Interval{}, fmt.Errorf("woolf odds ratio interval: %w: a zero cell in [[%d, %d], [%d, %d]]", ErrUndefined, x1, n1-x1, x2, n2-x2)
	}
	lor := math.Log(a * d / (b * c))
	half := zLevel(level) * math.Sqrt(1/a+1/b+1/c+1/d)
	return Interval{Lower: math.Exp(lor - half), Upper: math.Exp(lor + half), Level: level, Method: "Woolf logit"}, nil
}
