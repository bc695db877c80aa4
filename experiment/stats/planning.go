package stats

import (
	"fmt"
	"math"
)

// Planning functions size an experiment with two arms of equal size n (units
// per arm). Two approximations are common and differ by a few tenths of a
// percent; every function names the one it uses:
//
//   - the normal approximation with the pooled variance under H0 (Fleiss,
//     Levin and Paik), which is what R's power.prop.test solves;
//   - the arcsine approximation through Cohen's effect size h.
//
// For a one-sided alternative only |p1 - p2| matters: the plan assumes the
// effect goes the tested way.

func sides(alt Alternative) float64 {
	if alt == TwoSided {
		return 2
	}
	return 1
}

func checkPlan(p1, p2, alpha, power float64, alt Alternative) error {
	if err := checkOpen("rate p1", p1); err != nil {
		return err
	}
	if err := checkOpen("rate p2", p2); err != nil {
		return err
	}
	if p1 == p2 {
		return fmt.Errorf("%w: p1 = p2 = %v, nothing to detect", ErrBadParameter, p1)
	}
	if err := checkOpen("alpha", alpha); err != nil {
		return err
	}
	if err := checkOpen("power", power); err != nil {
		return err
	}
	if !(power > alpha/sides(alt)) {
		return fmt.Errorf("%w: power %v, want more than alpha/%v = %v", ErrBadParameter, power, sides(alt), alpha/sides(alt))
	}
	return checkAlt(alt)
}

// SampleSizeNormal returns the units per arm, unrounded, that a two-sided
// or one-sided pooled z test at level alpha needs to reach the given power
// when the true rates are p1 and p2 (normal approximation with the pooled
// variance under H0):
//
//	pbar = (p1 + p2)/2, z_a = z_{1 - alpha/sides}, z_b = z_{power}
//	n = (z_a sqrt(2 pbar (1 - pbar)) + z_b sqrt(p1 (1 - p1) + p2 (1 - p2)))^2 / (p1 - p2)^2
//
// Like R's power.prop.test (default strict = FALSE) it ignores the
// probability of rejecting in the wrong direction; [SampleSizeNormalBothTails]
// includes it. The approximation needs the planned counts n p and n (1 - p)
// to be large, which holds for any realistic conversion test.
//
// Special cases: p1 = p2, a rate outside (0, 1), alpha or power outside
// (0, 1), or power <= alpha/sides is an error wrapping [ErrBadParameter].
//
// References:
//
//  1. Fleiss JL, Levin B, Paik MC (2003). Statistical Methods for Rates and
//     Proportions, 3rd edition. Wiley, chapter 4.
func SampleSizeNormal(p1, p2, alpha, power float64, alt Alternative) (float64, error) {
	if err := checkPlan(p1, p2, alpha, power, alt); err != nil {
		return 0, fmt.Errorf("sample size: %w", err)
	}
	za := CriticalValue(alpha, alt)
	zb := NormalQuantile(power)
	pbar := (p1 + p2) / 2
	a := za*math.Sqrt(2*pbar*(1-pbar)) + zb*math.Sqrt(p1*(1-p1)+p2*(1-p2))
	if !(a > 0) {
		return 0, fmt.Errorf("sample size: %w: power %v too low for alpha %v", ErrBadParameter, power, alpha)
	}
	d := p1 - p2
	return a * a / (d * d), nil
}

// SampleSizePerArm returns the units per arm for a pooled z test at level
// alpha to reach the given power when the true rates are p1 and p2: the
// normal-approximation n of [SampleSizeNormal] rounded up.
//
// It is valid for the same cases as [SampleSizeNormal]; a result beyond
// 2^62 units is an error wrapping [ErrBadParameter].
//
// References:
//
//  1. Fleiss JL, Levin B, Paik MC (2003). Statistical Methods for Rates and
//     Proportions, 3rd edition. Wiley, chapter 4.
func SampleSizePerArm(p1, p2, alpha, power float64, alt Alternative) (int64, error) {
	n, err := SampleSizeNormal(p1, p2, alpha, power, alt)
	if err != nil {
		return 0, err
	}
	return ceilCount(n)
}

func ceilCount(n float64) (int64, error) {
	c := math.Ceil(n)
	if !(c < 1<<62) {
		return 0, fmt.Errorf("sample size: %w: %.4g units per arm is beyond any experiment", ErrBadParameter, n)
	}
	return int64(c), nil
}

// PowerNormal returns the power of a pooled z test at level alpha with n
// units per arm when the true rates are p1 and p2 (normal approximation
// with the pooled variance under H0, the inverse of [SampleSizeNormal]):
//
//	power = Phi((sqrt(n) |p1 - p2| - z_a sqrt(2 pbar (1 - pbar))) / sqrt(p1 q1 + p2 q2))
//
// As in R's power.prop.test (strict = FALSE), rejections in the wrong
// direction are not counted; see [PowerNormalBothTails].
//
// Special cases: n <= 0, a rate outside (0, 1) or alpha outside (0, 1) is an
// error wrapping [ErrBadParameter]; p1 = p2 gives alpha/sides.
//
// References:
//
//  1. Fleiss JL, Levin B, Paik MC (2003). Statistical Methods for Rates and
//     Proportions, 3rd edition. Wiley, chapter 4.
func PowerNormal(n, p1, p2, alpha float64, alt Alternative) (float64, error) {
	if err := checkPower(n, p1, p2, alpha, alt); err != nil {
		return 0, fmt.Errorf("power: %w", err)
	}
	return powerNormal(n, p1, p2, alpha, alt, false), nil
}

// PowerNormalBothTails is [PowerNormal] counting a two-sided test's
// rejections in either direction (R's power.prop.test with strict = TRUE):
//
//	power = Phi((sqrt(n) d - z_a s0) / s1) + Phi((-sqrt(n) d - z_a s0) / s1)
//
// with d = |p1 - p2|, s0 = sqrt(2 pbar (1 - pbar)), s1 = sqrt(p1 q1 + p2 q2).
// For a one-sided test it equals [PowerNormal].
func PowerNormalBothTails(n, p1, p2, alpha float64, alt Alternative) (float64, error) {
	if err := checkPower(n, p1, p2, alpha, alt); err != nil {
		return 0, fmt.Errorf("power: %w", err)
	}
	return powerNormal(n, p1, p2, alpha, alt, true), nil
}

func checkPower(n, p1, p2, alpha float64, alt Alternative) error {
	if !(n > 0) || math.IsInf(n, 0) {
		return fmt.Errorf("%w: %v units per arm", ErrBadParameter, n)
	}
	if err := checkOpen("rate p1", p1); err != nil {
		return err
	}
	if err := checkOpen("rate p2", p2); err != nil {
		return err
	}
	if err := checkOpen("alpha", alpha); err != nil {
		return err
	}
	return checkAlt(alt)
}

func powerNormal(n, p1, p2, alpha float64, alt Alternative, both bool) float64 {
	za := CriticalValue(alpha, alt)
	pbar := (p1 + p2) / 2
	s0 := math.Sqrt(2 * pbar * (1 - pbar))
	s1 := math.Sqrt(p1*(1-p1) + p2*(1-p2))
	d := math.Sqrt(n) * math.Abs(p1-p2)
	pw := NormalUpperTail(-(d - za*s0) / s1)
	if both && alt == TwoSided {
		pw += NormalUpperTail((d + za*s0) / s1)
	}
	return pw
}

// bisect returns the root of an increasing function f on [lo, hi], where
// f(lo) < 0 <= f(hi), to the resolution of float64.
func bisect(f func(float64) float64, lo, hi float64) float64 {
	for i := 0; i < 2000; i++ {
		mid := lo + (hi-lo)/2
		if mid <= lo || mid >= hi {
			break
		}
		if f(mid) < 0 {
			lo = mid
		} else {
			hi = mid
		}
	}
	return hi
}

// SampleSizeNormalBothTails returns the unrounded units per arm that a
// two-sided pooled z test needs for the given power when rejections in
// either direction are counted ([PowerNormalBothTails], R's
// power.prop.test(strict = TRUE)), found by bisection. It is a hair below
// [SampleSizeNormal]; for a one-sided test the two are equal.
//
// Special cases: as for [SampleSizeNormal].
//
// References:
//
//  1. Fleiss JL, Levin B, Paik MC (2003). Statistical Methods for Rates and
//     Proportions, 3rd edition. Wiley, chapter 4.
func SampleSizeNormalBothTails(p1, p2, alpha, power float64, alt Alternative) (float64, error) {
	n0, err := SampleSizeNormal(p1, p2, alpha, power, alt)
	if err != nil || alt != TwoSided {
		return n0, err
	}
	f := func(n float64) float64 { return powerNormal(n, p1, p2, alpha, alt, true) - power }
	return bisect(f, 0, n0), nil
}

// SampleSizeContinuityCorrected returns the normal-approximation n of
// [SampleSizeNormal] with the continuity correction of Fleiss, Tytun and
// Ury, for a test that will be run with Yates' correction:
//
//	n' = n/4 (1 + sqrt(1 + 4 / (n |p1 - p2|)))^2
//
// Special cases: as for [SampleSizeNormal].
//
// References:
//
//  1. Fleiss JL, Tytun A, Ury HK (1980). A simple approximation for
//     calculating sample sizes for comparing independent proportions.
//     Biometrics 36(2):343-346.
func SampleSizeContinuityCorrected(p1, p2, alpha, power float64, alt Alternative) (float64, error) {
	n, err := SampleSizeNormal(p1, p2, alpha, power, alt)
	if err != nil {
		return 0, err
	}
	r := 1 + math.Sqrt(1+4/(n*math.Abs(p1-p2)))
	return n / 4 * r * r, nil
}

// CohenH returns Cohen's effect size for two proportions, the difference of
// their arcsine-square-root transforms:
//
//	h = 2 asin(sqrt(p1)) - 2 asin(sqrt(p2))
//
// Rates outside [0, 1] are an error wrapping [ErrBadParameter].
//
// References:
//
//  1. Cohen J (1988). Statistical Power Analysis for the Behavioral
//     Sciences, 2nd edition. Lawrence Erlbaum, chapter 6.
func CohenH(p1, p2 float64) (float64, error) {
	if !(p1 >= 0 && p1 <= 1 && p2 >= 0 && p2 <= 1) {
		return 0, fmt.Errorf("cohen's h: %w: rates %v and %v, want numbers in [0, 1]", ErrBadParameter, p1, p2)
	}
	return 2*math.Asin(math.Sqrt(p1)) - 2*math.Asin(math.Sqrt(p2)), nil
}

// arcsinePower is the power of the arcsine test for effect |h| with n units
// per arm; a two-sided test counts both tails.
func arcsinePower(n, h, alpha float64, alt Alternative) float64 {
	za := CriticalValue(alpha, alt)
	s := math.Abs(h) * math.Sqrt(n/2)
	pw := NormalUpperTail(za - s)
	if alt == TwoSided {
		pw += NormalUpperTail(za + s)
	}
	return pw
}

// PowerArcsine returns the power of a test of p1 = p2 with n units per arm
// under the arcsine approximation, where 2 asin(sqrt(p_hat)) is normal
// with variance 1/n:
//
//	power = Phi(|h| sqrt(n/2) - z_a) [+ Phi(-|h| sqrt(n/2) - z_a) two-sided]
//
// with h = [CohenH](p1, p2) and z_a = z_{1 - alpha/sides}. A two-sided test
// counts both tails.
//
// Special cases: n <= 0, a rate outside (0, 1) or alpha outside (0, 1) is an
// error wrapping [ErrBadParameter].
//
// References:
//
//  1. Cohen J (1988). Statistical Power Analysis for the Behavioral
//     Sciences, 2nd edition. Lawrence Erlbaum, chapter 6.
func PowerArcsine(n, p1, p2, alpha float64, alt Alternative) (float64, error) {
	if err := checkPower(n, p1, p2, alpha, alt); err != nil {
		return 0, fmt.Errorf("arcsine power: %w", err)
	}
	h, _ := CohenH(p1, p2)
	return arcsinePower(n, h, alpha, alt), nil
}

// SampleSizeArcsine returns the unrounded units per arm for the given power
// under the arcsine approximation ([PowerArcsine], both tails counted when
// two-sided), found by bisection from the one-tail closed form
// n = 2 ((z_a + z_b) / h)^2.
//
// Special cases: as for [SampleSizeNormal].
//
// References:
//
//  1. Cohen J (1988). Statistical Power Analysis for the Behavioral
//     Sciences, 2nd edition. Lawrence Erlbaum, chapter 6.
func SampleSizeArcsine(p1, p2, alpha, power float64, alt Alternative) (float64, error) {
	if err := checkPlan(p1, p2, alpha, power, alt); err != nil {
		return 0, fmt.Errorf("arcsine sample size: %w", err)
	}
	h, _ := CohenH(p1, p2)
	s := CriticalValue(alpha, alt) + NormalQuantile(power)
	if !(s > 0) {
		return 0, fmt.Errorf("arcsine sample size: %w: power %v too low for alpha %v", ErrBadParameter, power, alpha)
	}
	n0 := 2 * (s / h) * (s / h)
	if alt != TwoSided {
		return n0, nil
	}
	f := func(n float64) float64 { return arcsinePower(n, h, alpha, alt) - power }
	return bisect(f, 0, n0), nil
}

// DetectableRate returns the rate p2 that a pooled z test with n units per
// arm detects with the given power against the baseline rate p1 (normal
// approximation, pooled variance under H0, wrong-direction rejections not
// counted, as R's power.prop.test solves for p2). The detectable rate is
// above p1 for [TwoSided] and [Greater], below it for [Less]; the minimum
// detectable effect is p2 - p1. It is found by bisection.
//
// Special cases: n <= 0, p1 outside (0, 1), alpha or power outside (0, 1)
// is an error wrapping [ErrBadParameter]; when no rate up to 1 (down to 0)
// reaches the power, the error wraps [ErrUndefined].
//
// References:
//
//  1. Fleiss JL, Levin B, Paik MC (2003). Statistical Methods for Rates and
//     Proportions, 3rd edition. Wiley, chapter 4.
func DetectableRate(n, p1, alpha, power float64, alt Alternative) (float64, error) {
	if err := checkPower(n, p1, 0.5, alpha, alt); err != nil {
		return 0, fmt.Errorf("detectable rate: %w", err)
	}
	if err := checkOpen("power", power); err != nil {
		return 0, fmt.Errorf("detectable rate: %w", err)
	}
	// g(t) increases with the distance t from p1.
	dir := 1.0
	limit := 1 - p1
	if alt == Less {
		dir, limit = -1, p1
	}
	g := func(t float64) float64 { return powerNormal(n, p1, p1+dir*t, alpha, alt, false) - power }
	hi := limit * (1 - 1e-15)
	if g(0) >= 0 || g(hi) < 0 {
		return 0, fmt.Errorf("detectable rate: %w: no rate reaches power %v with %v units per arm", ErrUndefined, power, n)
	}
	return p1 + dir*bisect(g, 0, hi), nil
}

// DetectableCohenH returns the effect size |h| that a test with n units per
// arm detects with the given power under the arcsine approximation (both
// tails counted when two-sided), found by bisection. [DetectableRateArcsine]
// turns it into a rate.
//
// Special cases: n <= 0, alpha or power outside (0, 1), or power <=
// alpha/sides is an error wrapping [ErrBadParameter].
//
// References:
//
//  1. Cohen J (1988). Statistical Power Analysis for the Behavioral
//     Sciences, 2nd edition. Lawrence Erlbaum, chapter 6.
func DetectableCohenH(n, alpha, power float64, alt Alternative) (float64, error) {
	if err := checkPower(n, 0.5, 0.5, alpha, alt); err != nil {
		return 0, fmt.Errorf("detectable effect size: %w", err)
	}
	if err := checkOpen("power", power); err != nil {
		return 0, fmt.Errorf("detectable effect size: %w", err)
	}
	f := func(h float64) float64 { return arcsinePower(n, h, alpha, alt) - power }
	if f(0) >= 0 {
		return 0, fmt.Errorf("detectable effect size: %w: power %v, want more than alpha/%v", ErrBadParameter, power, sides(alt))
	}
	hi := 1.0
	for f(hi) < 0 {
		hi *= 2
	}
	return bisect(f, 0, hi), nil
}

// DetectableRateArcsine returns the rate p2 detectable with the given power
// against the baseline p1 with n units per arm under the arcsine
// approximation:
//
//	p2 = sin(asin(sqrt(p1)) +/- h/2)^2, h = DetectableCohenH(n, alpha, power, alt)
//
// above p1 for [TwoSided] and [Greater], below it for [Less].
//
// Special cases: as for [DetectableCohenH], plus p1 outside (0, 1); when the
// shifted angle leaves [0, pi/2] no rate reaches the power and the error
// wraps [ErrUndefined].
func DetectableRateArcsine(n, p1, alpha, power float64, alt Alternative) (float64, error) {
	if err := checkOpen("rate p1", p1); err != nil {
		return 0, fmt.Errorf("detectable rate: %w", err)
	}
	h, err := DetectableCohenH(n, alpha, power, alt)
	if err != nil {
		return 0, err
	}
	phi := math.Asin(math.Sqrt(p1))
	if alt == Less {
		phi -= h / 2
	} else {
		phi += h / 2
	}
	if phi < 0 || phi > math.Pi/2 {
		return 0, fmt.Errorf("detectable rate: %w: no rate reaches power %v with %v units per arm", ErrUndefined, power, n)
	}
	s := math.Sin(phi)
	return s * s, nil
}
