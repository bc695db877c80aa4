package stats

import (
	"fmt"
	"math"
)

// ZTest is a z test decided by both routes: the statistic against the
// critical value, and the p-value against alpha. The two routes agree
// except, possibly, when the statistic equals the critical value to within
// rounding (about 1e-15 relative).
type ZTest struct {
	// Method is the test's name as the readout prints it.
	Method string
	// Statistic is the z statistic; 0 when it is undefined (see Warnings).
	Statistic float64
	// CriticalValue is the positive critical value for Alpha and
	// Alternative (see [CriticalValue]).
	CriticalValue float64
	// PValue is the p-value for Alternative; 1 when the statistic is
	// undefined.
	PValue      float64
	Alpha       float64
	Alternative Alternative
	// RejectByStatistic is |z| >= CriticalValue (two-sided), z >=
	// CriticalValue (greater) or z <= -CriticalValue (less).
	RejectByStatistic bool
	// RejectByPValue is PValue <= Alpha.
	RejectByPValue bool
	// Warnings explain an undefined statistic. The normal-approximation
	// conditions are checked separately ([TwoSampleCondition],
	// [OneSampleCondition]).
	Warnings []string
}

// decide fills in the critical value, p-value and both decisions.
func decide(method string, z, alpha float64, alt Alternative) ZTest {
	crit := CriticalValue(alpha, alt)
	t := ZTest{Method: method, Statistic: z, CriticalValue: crit, PValue: ZPValue(z, alt), Alpha: alpha, Alternative: alt}
	switch alt {
	case Greater:
		t.RejectByStatistic = z >= crit
	case Less:
		t.RejectByStatistic = z <= -crit
	default:
		t.RejectByStatistic = math.Abs(z) >= crit
	}
	t.RejectByPValue = t.PValue <= alpha
	return t
}

func checkTest(alpha float64, alt Alternative) error {
	if err := checkOpen("alpha", alpha); err != nil {
		return err
	}
	return checkAlt(alt)
}

// TwoProportionZTest returns the pooled two-proportion z test of p1 = p2
// (treatment vs control):
//
//	p1 = x1/n1, p2 = x2/n2, pbar = (x1 + x2) / (n1 + n2)
//	z = (p1 - p2) / sqrt(pbar (1 - pbar) (1/n1 + 1/n2))
//
// z^2 is Pearson's chi-square statistic of the 2x2 table without continuity
// correction (R's prop.test(correct = FALSE)). H0: p1 = p2; H1: p1 != p2
// ([TwoSided]), p1 > p2 ([Greater]) or p1 < p2 ([Less]).
//
// It assumes two independent samples of independent units and relies on
// the normal approximation, which the classic rule trusts with at least 5
// conversions and 5 non-conversions in each arm ([TwoSampleCondition]);
// where that fails armtally decides by [FisherExact] instead.
//
// Special cases: when no unit converted in either arm (pbar = 0) or every
// unit did (pbar = 1) the statistic is 0/0: the test returns z = 0, p = 1,
// no rejection by either route, and a warning saying why. 0 conversions in
// only one arm is an ordinary case. n = 1 is allowed; n <= 0, x < 0 or
// x > n in either arm is an error wrapping [ErrBadCount]; alpha outside
// (0, 1) an error wrapping [ErrBadParameter].
//
// References:
//
//  1. Fleiss JL, Levin B, Paik MC (2003). Statistical Methods for Rates and
//     Proportions, 3rd edition. Wiley, chapter 2.
//  2. Pearson K (1900). On the criterion that a given system of deviations
//     from the probable in the case of a correlated system of variables is
//     such that it can be reasonably supposed to have arisen from random
//     sampling. Philosophical Magazine 50(302):157-175.
func TwoProportionZTest(x1, n1, x2, n2 int64, alpha float64, alt Alternative) (ZTest, error) {
	const method = "pooled two-proportion z test"
	if err := checkTwo(x1, n1, x2, n2); err != nil {
		return ZTest{}, fmt.Errorf("%s: %w", method, err)
	}
	if err := checkTest(alpha, alt); err != nil {
		return ZTest{}, fmt.Errorf("%s: %w", method, err)
	}
	if x1+x2 == 0 || x1+x2 == n1+n2 {
		t := decide(method, 0, alpha, alt)
		t.PValue = 1
		t.RejectByPValue = false
		t.RejectByStatistic = false
		what := "no unit converted in either arm"
		if x1+x2 > 0 {
			what = "every unit converted in both arms"
		}
		t.Warnings = []string{"pooled z statistic undefined: " + what + "; reported as z = 0, p = 1"}
		return t, nil
	}
	nf1, nf2 := float64(n1), float64(n2)
	z := rateDiff(x1, n1, x2, n2) / math.Sqrt(rateVar(x1+x2, n1+n2)*(1/nf1+1/nf2))
	return decide(method, z, alpha, alt), nil
}

// OneProportionZTest returns the one-proportion score z test of p = p0
// against a fixed target rate p0:
//
//	z = (x/n - p0) / sqrt(p0 (1 - p0) / n)
//
// The variance is taken under H0 (p0, not x/n), which is what R's
// prop.test(x, n, p = p0, correct = FALSE) computes (its X-squared is z^2).
// H0: p = p0; H1: p != p0 ([TwoSided]), p > p0 ([Greater]) or p < p0
// ([Less]).
//
// It assumes n independent units with a common conversion probability and
// relies on the normal approximation, trusted when n p0 and n (1 - p0) are
// both at least 5 ([OneSampleCondition]); otherwise armtally decides by
// [BinomialExact].
//
// Special cases: x = 0 and x = n are ordinary cases (the variance uses p0,
// so z stays finite); n = 1 gives z = +/-sqrt((1 - p0)/p0) or its mirror;
// n <= 0, x < 0 or x > n is an error wrapping [ErrBadCount]; p0 outside the
// open interval (0, 1) or alpha outside (0, 1) is an error wrapping
// [ErrBadParameter].
//
// References:
//
//  1. Fleiss JL, Levin B, Paik MC (2003). Statistical Methods for Rates and
//     Proportions, 3rd edition. Wiley, chapter 2.
//  2. Wilson EB (1927). Probable inference, the law of succession, and
//     statistical inference. Journal of the American Statistical
//     Association 22(158):209-212.
func OneProportionZTest(x, n int64, p0, alpha float64, alt Alternative) (ZTest, error) {
	const method = "one-proportion z test"
	if err := checkCount(x, n); err != nil {
		return ZTest{}, fmt.Errorf("%s: %w", method, err)
	}
	if err := checkOpen("target rate", p0); err != nil {
		return ZTest{}, fmt.Errorf("%s: %w", method, err)
	}
	if err := checkTest(alpha, alt); err != nil {
		return ZTest{}, fmt.Errorf("%s: %w", method, err)
	}
	nf := float64(n)
	z := (float64(x)/nf - p0) / math.Sqrt(p0*(1-p0)/nf)
	return decide(method, z, alpha, alt), nil
}

// NonInferiorityMethod selects the variance of a non-inferiority z test.
type NonInferiorityMethod int

const (
	// FarringtonManning uses the variance at the restricted maximum
	// likelihood estimates under H0 (the score test).
	FarringtonManning NonInferiorityMethod = iota
	// MiettinenNurminen is FarringtonManning with the variance multiplied
	// by N / (N - 1), N = n1 + n2.
	MiettinenNurminen
	// WaldNonInferiority uses the unpooled variance at the observed rates.
	WaldNonInferiority
)

// String returns "farrington-manning", "miettinen-nurminen" or "wald",
// the names ParseNonInferiorityMethod reads.
func (m NonInferiorityMethod) String() string {
	switch m {
	case FarringtonManning:
		return "farrington-manning"
	case MiettinenNurminen:
		return "miettinen-nurminen"
	case WaldNonInferiority:
		return "wald"
	}
	return fmt.Sprintf("NonInferiorityMethod(%d)", int(m))
}

// Name returns the method's name as the readout prints it:
// "Farrington-Manning score", "Miettinen-Nurminen score" or "Wald".
func (m NonInferiorityMethod) Name() string {
	switch m {
	case FarringtonManning:
		return "Farrington-Manning score"
	case MiettinenNurminen:
		return "Miettinen-Nurminen score"
	case WaldNonInferiority:
		return "Wald"
	}
	return m.String()
}

// Valid reports whether m is one of the methods above.
func (m NonInferiorityMethod) Valid() bool { return m >= FarringtonManning && m <= WaldNonInferiority }

// ParseNonInferiorityMethod parses the names String returns, exactly.
func ParseNonInferiorityMethod(s string) (NonInferiorityMethod, error) {
	for _, m := range []NonInferiorityMethod{FarringtonManning, MiettinenNurminen, WaldNonInferiority} {
		if s == m.String() {
			return m, nil
		}
	}
	return FarringtonManning, fmt.Errorf("%q: want farrington-manning, miettinen-nurminen or wald", s)
}

// restrictedMLE returns the maximum likelihood estimates (p1~, p2~) of two
// binomial proportions under the constraint p1 - p2 = delta, from the
// closed-form root of the likelihood cubic (Farrington and Manning 1990,
// after Miettinen and Nurminen 1985).
func restrictedMLE(x1, n1, x2, n2 int64, delta float64) (float64, float64) {
	nf1, nf2 := float64(n1), float64(n2)
	p1, p2 := float64(x1)/nf1, float64(x2)/nf2
	theta := nf2 / nf1
	a := 1 + theta
	b := -(1 + theta + p1 + theta*p2 + delta*(theta+2))
	c := delta*delta + delta*(2*p1+theta+1) + p1 + theta*p2
	d := -p1 * delta * (1 + delta)
	v := b*b*b/(27*a*a*a) - b*c/(6*a*a) + d/(2*a)
	u := math.Sqrt(math.Max(0, b*b/(9*a*a)-c/(3*a)))
	if v < 0 {
		u = -u
	}
	var r1 float64
	if u == 0 {
		r1 = -b / (3 * a)
	} else {
		w := (math.Pi + math.Acos(clip(v/(u*u*u), -1, 1))) / 3
		r1 = 2*u*math.Cos(w) - b/(3*a)
	}
	r1 = clip(r1, math.Max(0, delta), math.Min(1, 1+delta))
	return r1, r1 - delta
}

// NonInferiorityZTest returns the one-sided z test that the treatment is not
// worse than the control by more than margin (a guardrail metric):
//
//	H0: p1 - p2 <= -margin    H1: p1 - p2 > -margin
//	z = (p1 - p2 + margin) / se,  p = Q(z)
//
// with se from method:
//
//	Wald:                sqrt(p1 q1 / n1 + p2 q2 / n2) at the observed rates
//	Farrington-Manning:  sqrt(p1~ q1~ / n1 + p2~ q2~ / n2)
//	Miettinen-Nurminen:  the Farrington-Manning se times sqrt(N / (N - 1))
//
// where (p1~, p2~) maximise the likelihood subject to p1~ - p2~ = -margin
// (closed-form root of a cubic) and N = n1 + n2. The result's Alternative is
// [Greater] and its critical value z_{1 - alpha}.
//
// It assumes two independent samples and relies on the normal
// approximation (large counts in both arms; see [TwoSampleCondition]). The
// score versions behave better than Wald for small counts and rates near 0.
//
// Special cases: with margin > 0 the score variance is always positive,
// including 0 conversions in both arms. When the variance is 0 (Wald with
// every rate 0 or 1, or margin = 0 with pbar 0 or 1) the test returns
// z = 0, p = 1, no rejection and a warning. n <= 0, x < 0 or x > n is an
// error wrapping [ErrBadCount]; margin outside [0, 1), alpha outside (0, 1)
// or an unknown method an error wrapping [ErrBadParameter].
//
// References:
//
//  1. Farrington CP, Manning G (1990). Test statistics and sample size
//     formulae for comparative binomial trials with null hypothesis of
//     non-zero risk difference or non-unity relative risk. Statistics in
//     Medicine 9(12):1447-1454.
//  2. Miettinen O, Nurminen M (1985). Comparative analysis of two rates.
//     Statistics in Medicine 4(2):213-226.
func NonInferiorityZTest(x1, n1, x2, n2 int64, margin, alpha float64, method NonInferiorityMethod) (ZTest, error) {
	name := "non-inferiority z test (" + method.Name() + ")"
	if err := checkTwo(x1, n1, x2, n2); err != nil {
		return ZTest{}, fmt.Errorf("%s: %w", name, err)
	}
	if !(margin >= 0 && margin < 1) {
		return ZTest{}, fmt.Errorf("%s: %w: margin %v, want a number in [0, 1)", name, ErrBadParameter, margin)
	}
	if err := checkOpen("alpha", alpha); err != nil {
		return ZTest{}, fmt.Errorf("%s: %w", name, err)
	}
	nf1, nf2 := float64(n1), float64(n2)
	var variance float64
	switch method {
	case WaldNonInferiority:
		variance = rateVar(x1, n1)/nf1 + rateVar(x2, n2)/nf2
	case FarringtonManning, MiettinenNurminen:
		r1, r2 := restrictedMLE(x1, n1, x2, n2, -margin)
		variance = r1*(1-r1)/nf1 + r2*(1-r2)/nf2
		if method == MiettinenNurminen {
			n := nf1 + nf2
			variance *= n / (n - 1)
		}
	default:
		return ZTest{}, fmt.Errorf("%s: %w: method %d", name, ErrBadParameter, int(method))
	}
	if !(variance > 0) {
		t := decide(name, 0, alpha, Greater)
		t.PValue, t.RejectByPValue, t.RejectByStatistic = 1, false, false
		t.Warnings = []string{"non-inferiority z statistic undefined: the estimated variance is 0; reported as z = 0, p = 1"}
		return t, nil
	}
	z := (rateDiff(x1, n1, x2, n2) + margin) / math.Sqrt(variance)
	return decide(name, z, alpha, Greater), nil
}
