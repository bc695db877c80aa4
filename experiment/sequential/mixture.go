package sequential

import (
	"fmt"
	"math"
)

// DefaultMixingVariance is the mixing variance tau^2 used when a run gives
// none: tau = 0.01, a prior spread of one percentage point for the
// difference of two conversion rates. The mixture test is most efficient
// (its confidence sequence narrowest for the data) when the variance of
// the difference has fallen to about tau^2 / 8 at alpha = 0.05 (see
// [TunedMixingVariance]); for a 5% conversion rate that is near 8,000 units
// per arm, so the default suits experiments of several thousand to tens of
// thousands of units per arm at rates of a few per cent. A run that knows
// its planned units should use TunedMixingVariance instead.
const DefaultMixingVariance = 1e-4

// Mixture is the mixture sequential probability ratio test of a difference
// of two proportions with a normal mixing distribution (Robbins 1970),
// in the form of Johari, Koomen, Pekelis and Walsh (2017) for two-arm
// comparisons: at each look the difference estimate theta_hat (treatment
// minus control) is taken as normal with mean theta and the plug-in
// variance V, and the likelihood ratio of theta against the null
// difference theta_0 is averaged over theta ~ N(theta_0, tau^2):
//
//	Lambda = sqrt(V / (V + tau^2)) exp(tau^2 (theta_hat - theta_0)^2 / (2 V (V + tau^2))).
//
// Under the null hypothesis Lambda is (asymptotically, as the counts grow)
// a nonnegative martingale with mean 1, so by Ville's inequality the
// chance that it ever reaches 1/alpha, at any look, however many looks
// and whenever the looks are taken, is at most alpha. The always-valid
// p-value is the running minimum of 1/Lambda, capped at 1, and the
// matching confidence sequence is the set of theta_0 the test has not
// rejected:
//
//	theta_hat +/- sqrt(V (V + tau^2) / tau^2 (log((V + tau^2) / V) + 2 log(1/alpha))),
//
// intersected over the looks so far. With V = sigma^2 / n this is the
// two-sided normal-mixture boundary of Howard, Ramdas, McAuliffe and Sekhon
// (2021) with their rho = sigma^4 / tau^2.
//
// The mixing variance Tau2 sets when the test is strongest: a small tau^2
// bets on small effects and gives a narrow sequence late (large samples)
// at the price of width early; a large tau^2 detects large effects at the
// first looks but widens the sequence late. The sequence is narrowest
// when V is about tau^2 / x, with x the root of x = log(1 + x) +
// 2 log(1/alpha) (x = 8.2 at alpha = 0.05); see [TunedMixingVariance] and
// [DefaultMixingVariance]. Tau2 must be fixed before the data are seen:
// choosing it from the data voids the guarantee.
//
// The test is two-sided. It relies on the normal approximation of the
// difference estimate, so its guarantee is asymptotic: with very few units
// or conversions per arm its error rate can exceed alpha.
//
// References: H. Robbins (1970), Statistical methods related to the law of
// the iterated logarithm, Annals of Mathematical Statistics 41(5),
// 1397-1409; R. Johari, P. Koomen, L. Pekelis and D. Walsh (2017), Peeking
// at A/B tests: why it matters, and what to do about it, Proceedings of
// the 23rd ACM SIGKDD, 1517-1525; S. R. Howard, A. Ramdas, J. McAuliffe and
// J. Sekhon (2021), Time-uniform, nonparametric, nonasymptotic confidence
// sequences, Annals of Statistics 49(2), 1055-1080.
type Mixture struct {
	// Tau2 is the mixing variance tau^2 (> 0), on the scale of the
	// difference of proportions squared.
	Tau2 float64
	// Alpha is the level of the test and 1 - Alpha the coverage of the
	// confidence sequence, in (0, 1).
	Alpha float64
	// Null is the difference theta_0 of the null hypothesis, usually 0.
	Null float64
}

// Check returns an error wrapping ErrBadSetting when Tau2 is not positive
// and finite, Alpha is not in (0, 1) or Null is not in (-1, 1).
func (m Mixture) Check() error {
	if !(m.Tau2 > 0) || math.IsInf(m.Tau2, 0) {
		return fmt.Errorf("%w: mixing variance %v is not positive and finite", ErrBadSetting, m.Tau2)
	}
	if !(m.Alpha > 0 && m.Alpha < 1) {
		return fmt.Errorf("%w: alpha %v is not in (0, 1)", ErrBadSetting, m.Alpha)
	}
	if !(m.Null > -1 && m.Null < 1) {
		return fmt.Errorf("%w: null difference %v is not in (-1, 1)", ErrBadSetting, m.Null)
	}
	return nil
}

// LogLikelihoodRatio returns log Lambda for the difference estimate diff
// with variance v (the formula in [Mixture]). A look with v = 0 (every unit
// of both arms converted, or none did) carries no information and gives 0.
func (m Mixture) LogLikelihoodRatio(diff, v float64) float64 {
	if !(v > 0) {
		return 0
	}
	d := diff - m.Null
	return 0.5*math.Log(v/(v+m.Tau2)) + m.Tau2*d*d/(2*v*(v+m.Tau2))
}

// HalfWidth returns the half-width of the look's confidence interval, the
// set of differences whose mixture likelihood ratio stays below 1/Alpha,
// for an estimate of variance v > 0:
//
//	sqrt(v (v + tau^2) / tau^2 (log((v + tau^2) / v) + 2 log(1/alpha))).
func (m Mixture) HalfWidth(v float64) float64 {
	return math.Sqrt(v * (v + m.Tau2) / m.Tau2 * (math.Log1p(m.Tau2/v) - 2*math.Log(m.Alpha)))
}

// Estimate is the difference of two proportions at one look: treatment
// minus control, and the variance of that difference.
type Estimate struct {
	Difference float64
	Variance   float64
}

// ProportionsDifference returns the estimate p1 - p2 of the difference of
// two proportions, x1 of n1 units of the treatment against x2 of n2 of the
// control, with the unpooled plug-in variance p1 (1 - p1) / n1 + p2 (1 -
// p2) / n2 (Johari et al. 2017 use this variance in the mixture test).
func ProportionsDifference(x1, n1, x2, n2 int64) (Estimate, error) {
	if n1 <= 0 || n2 <= 0 || x1 < 0 || x2 < 0 || x1 > n1 || x2 > n2 {
		return Estimate{}, fmt.Errorf("%w: counts %d of %d and %d of %d", ErrBadSetting, x1, n1, x2, n2)
	}
	p1, p2 := float64(x1)/float64(n1), float64(x2)/float64(n2)
	return Estimate{Difference: p1 - p2, Variance: p1*(1-p1)/float64(n1) + p2*(1-p2)/float64(n2)}, nil
}

// MixtureLook is the always-valid readout of one look.
type MixtureLook struct {
	Estimate
	// LogLikelihoodRatio is log Lambda at this look.
	LogLikelihoodRatio float64
	// P is the always-valid p-value: the minimum of 1/Lambda over the
	// looks so far, capped at 1.
	P float64
	// Rejected is whether P <= Alpha: the null difference is rejected, at
	// this look or an earlier one.
	Rejected bool
	// Lower and Upper bound this look's interval (within [-1, 1]).
	Lower, Upper float64
	// SequenceLower and SequenceUpper bound the confidence sequence: the
	// intersection of the intervals of the looks so far.
	SequenceLower, SequenceUpper float64
	// Empty is whether that intersection is empty (SequenceLower >
	// SequenceUpper): the data have moved further than the sequence allows
	// for any single difference, which under the model has chance at most
	// Alpha.
	Empty bool
}

// Monitor runs the test over the looks in order and returns each look's
// readout. An estimate with a negative, NaN or infinite variance, or a
// difference outside [-1, 1], is an error naming the look.
func (m Mixture) Monitor(looks []Estimate) ([]MixtureLook, error) {
	if err := m.Check(); err != nil {
		return nil, err
	}
	out := make([]MixtureLook, len(looks))
	p, lo, hi := 1.0, -1.0, 1.0
	for j, e := range looks {
		if !(e.Variance >= 0) || math.IsInf(e.Variance, 0) || !(e.Difference >= -1 && e.Difference <= 1) {
			return nil, fmt.Errorf("%w: look %d: difference %v with variance %v", ErrBadSetting, j+1, e.Difference, e.Variance)
		}
		l := MixtureLook{Estimate: e, Lower: -1, Upper: 1}
		l.LogLikelihoodRatio = m.LogLikelihoodRatio(e.Difference, e.Variance)
		p = math.Min(p, math.Exp(-l.LogLikelihoodRatio))
		if e.Variance > 0 {
			w := m.HalfWidth(e.Variance)
			l.Lower, l.Upper = math.Max(-1, e.Difference-w), math.Min(1, e.Difference+w)
		}
		lo, hi = math.Max(lo, l.Lower), math.Min(hi, l.Upper)
		l.P, l.Rejected = p, p <= m.Alpha
		l.SequenceLower, l.SequenceUpper, l.Empty = lo, hi, lo > hi
		out[j] = l
	}
	return out, nil
}

// TunedMixingVariance returns the mixing variance that makes the
// confidence sequence narrowest at the look where the variance of the
// difference estimate is v (the planned horizon: v = p1 (1 - p1) / n1 +
// p2 (1 - p2) / n2 at the planned units and expected rates). Writing
// tau^2 = x v, the squared half-width of [Mixture.HalfWidth] is v^2 (1 +
// x) / x (log(1 + x) + 2 log(1/alpha)), whose derivative in x vanishes at
// x = log(1 + x) + 2 log(1/alpha) (worked out here; the fixed point is
// found by iteration, which contracts since the slope 1/(1 + x) is below
// 1). At alpha = 0.05, x = 8.21.
func TunedMixingVariance(alpha, v float64) (float64, error) {
	if !(alpha > 0 && alpha < 1) {
		return 0, fmt.Errorf("%w: alpha %v is not in (0, 1)", ErrBadSetting, alpha)
	}
	if !(v > 0) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("%w: variance %v is not positive and finite", ErrBadSetting, v)
	}
	c := -2 * math.Log(alpha)
	x := c
	for range 200 {
		nx := math.Log1p(x) + c
		if math.Abs(nx-x) <= 1e-14*nx {
			x = nx
			break
		}
		x = nx
	}
	return x * v, nil
}
