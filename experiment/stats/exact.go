package stats

import (
	"fmt"
	"math"
)

// relErr is the relative tolerance of the minimum-likelihood two-sided
// rule: an outcome counts as no more likely than the observed one when its
// probability is at most (1 + 1e-7) times the observed probability, as in
// R's binom.test and fisher.test. Without it, ties that are exact in real
// arithmetic but differ in the last bit are split wrongly.
const relErr = 1 + 1e-7

// ExactTest is an exact test of a 2x2 table or of one proportion.
type ExactTest struct {
	// Method is the test's name as the readout prints it.
	Method      string
	PValue      float64
	Alpha       float64
	Alternative Alternative
	// Reject is PValue <= Alpha.
	Reject bool
}

// stirlerr returns log(n!) - log(sqrt(2 pi n) (n/e)^n), the error of
// Stirling's formula, for n >= 1.
func stirlerr(n float64) float64 {
	const (
		s0 = 1.0 / 12
		s1 = 1.0 / 360
		s2 = 1.0 / 1260
		s3 = 1.0 / 1680
		s4 = 1.0 / 1188
	)
	if n <= 15 {
		lg, _ := math.Lgamma(n + 1)
		return lg - (n+0.5)*math.Log(n) + n - 0.5*math.Log(2*math.Pi)
	}
	nn := n * n
	switch {
	case n > 500:
		return (s0 - s1/nn) / n
	case n > 80:
		return (s0 - (s1-s2/nn)/nn) / n
	case n > 35:
		return (s0 - (s1-(s2-s3/nn)/nn)/nn) / n
	}
	return (s0 - (s1-(s2-(s3-s4/nn)/nn)/nn)/nn) / n
}

// bd0 returns x log(x/np) + np - x, the deviance term, without
// cancellation when x is close to np.
func bd0(x, np float64) float64 {
	if math.Abs(x-np) < 0.1*(x+np) {
		v := (x - np) / (x + np)
		s := (x - np) * v
		ej := 2 * x * v
		v *= v
		for j := 1; j < 1000; j++ {
			ej *= v
			s1 := s + ej/float64(2*j+1)
			if s1 == s {
				return s1
			}
			s = s1
		}
		return s
	}
	return x*math.Log(x/np) + np - x
}

// logDbinom returns log P(X = x) for X ~ Binomial(n, p), q = 1 - p, by
// Loader's saddle-point expansion, accurate to a few ulps of the log even
// for n in the millions (where log-gamma differences lose digits).
func logDbinom(x, n, p, q float64) float64 {
	switch {
	case x < 0 || x > n:
		return math.Inf(-1)
	case p == 0:
		if x == 0 {
			return 0
		}
		return math.Inf(-1)
	case q == 0:
		if x == n {
			return 0
		}
		return math.Inf(-1)
	case x == 0:
		if n == 0 {
			return 0
		}
		if p < 0.1 {
			return -bd0(n, n*q) - n*p
		}
		return n * math.Log(q)
	case x == n:
		if q < 0.1 {
			return -bd0(n, n*p) - n*q
		}
		return n * math.Log(p)
	}
	lc := stirlerr(n) - stirlerr(x) - stirlerr(n-x) - bd0(x, n*p) - bd0(n-x, n*q)
	lf := math.Log(2*math.Pi) + math.Log(x) + math.Log1p(-x/n)
	return lc - 0.5*lf
}

// binomTail returns P(X <= k) (upper false) or P(X >= k) (upper true) for
// X ~ Binomial(n, p), 0 < p < 1. The terms are Loader's densities summed
// from the largest one in the range outward (see binomSum), so a small
// tail keeps its relative precision, and no tail is formed as 1 - CDF.
//
// gonum's mathext.RegIncBeta gives the same tails, I_p(k, n-k+1) and
// I_{1-p}(n-k, k+1), but for n around 1e6 its log-gamma prefactor costs
// about 1e-9 relative (against R's pbinom); the sum keeps about 1e-14.
func binomTail(k, n int64, p float64, upper bool) float64 {
	if upper {
		return binomSum(k, n, n, p)
	}
	return binomSum(0, k, n, p)
}

// binomSum returns P(from <= X <= to) for X ~ Binomial(n, p), walking
// outward from the largest term of the range (the one nearest the mode
// floor((n+1)p)) with the ratio of consecutive terms, and stopping once a
// term no longer changes the sum.
func binomSum(from, to, n int64, p float64) float64 {
	from, to = max(from, 0), min(to, n)
	if from > to {
		return 0
	}
	q := 1 - p
	nf := float64(n)
	mode := int64(math.Floor((nf + 1) * p))
	start := min(max(mode, from), to)
	odds := p / q
	s, t := 1.0, 1.0
	for k := start; k < to; k++ {
		t *= float64(n-k) / float64(k+1) * odds
		s += t
		if t <= s*1e-17 {
			break
		}
	}
	t = 1
	for k := start; k > from; k-- {
		t *= float64(k) / float64(n-k+1) / odds
		s += t
		if t <= s*1e-17 {
			break
		}
	}
	return s * math.Exp(logDbinom(float64(start), nf, p, q))
}

// BinomialExact returns the exact binomial test of p = p0 for x conversions
// out of n units. The one-sided p-values are binomial tails,
//
//	greater: P(X >= x),  less: P(X <= x),  X ~ Binomial(n, p0),
//
// summed directly from accurate binomial densities (Loader 2000), never as
// 1 - CDF: they equal the regularized incomplete beta functions
// I_p0(x, n-x+1) and I_{1-p0}(n-x, x+1) to about 1e-14 relative, also for
// millions of units. The two-sided p-value follows the minimum-likelihood
// rule:
//
//	p = sum of P(X = k) over all k with P(X = k) <= (1 + 1e-7) P(X = x)
//
// capped at 1, with the relative tolerance 1e-7 of R's binom.test so that
// exact ties (P(X = 1) = P(X = 5) for n = 6, p0 = 1/2) are not split by
// rounding. H0: p = p0; H1: p != p0, p > p0 or p < p0.
//
// It assumes n independent units with a common conversion probability and
// makes no large-sample approximation; armtally uses it instead of
// [OneProportionZTest] when [OneSampleCondition] fails. Being discrete, it
// is conservative: its actual size is at most alpha.
//
// Special cases: x = 0 gives p = 1 for [Greater] and (1 - p0)^n for [Less];
// x = n gives p = 1 for [Less] and p0^n for [Greater]; x = n p0 exactly
// gives a two-sided p = 1; n = 1 is allowed; n <= 0, x < 0 or x > n is an
// error wrapping [ErrBadCount]; p0 outside (0, 1) or alpha outside (0, 1)
// an error wrapping [ErrBadParameter].
//
// References:
//
//  1. Clopper CJ, Pearson ES (1934). The use of confidence or fiducial
//     limits illustrated in the case of the binomial. Biometrika
//     26(4):404-413.
//  2. Hollander M, Wolfe DA (1973). Nonparametric Statistical Methods.
//     Wiley, pages 15-22.
//  3. Loader C (2000). Fast and accurate computation of binomial
//     probabilities. Technical report, Bell Laboratories.
func BinomialExact(x, n int64, p0, alpha float64, alt Alternative) (ExactTest, error) {
	const method = "exact binomial test"
	if err := checkCount(x, n); err != nil {
		return ExactTest{}, fmt.Errorf("%s: %w", method, err)
	}
	if err := checkOpen("target rate", p0); err != nil {
		return ExactTest{}, fmt.Errorf("%s: %w", method, err)
	}
	if err := checkTest(alpha, alt); err != nil {
		return ExactTest{}, fmt.Errorf("%s: %w", method, err)
	}
	var p float64
	switch alt {
	case Greater:
		p = binomTail(x, n, p0, true)
	case Less:
		p = binomTail(x, n, p0, false)
	default:
		p = binomTwoSided(x, n, p0)
	}
	p = clip(p, 0, 1)
	return ExactTest{Method: method, PValue: p, Alpha: alpha, Alternative: alt, Reject: p <= alpha}, nil
}

// binomTwoSided applies the minimum-likelihood rule. The probabilities are
// nonincreasing on [ceil(n p0), n] and nondecreasing on [0, floor(n p0)],
// so the far tail is found by bisection instead of a scan.
func binomTwoSided(x, n int64, p0 float64) float64 {
	nf := float64(n)
	q0 := 1 - p0
	m := nf * p0
	if float64(x) == m {
		return 1
	}
	logd := func(k int64) float64 { return logDbinom(float64(k), nf, p0, q0) }
	thr := logd(x) + math.Log(relErr)
	if float64(x) < m {
		// First k in [ceil(m), n] with P(k) <= threshold.
		lo, hi := int64(math.Ceil(m)), n+1
		for lo < hi {
			mid := lo + (hi-lo)/2
			if logd(mid) <= thr {
				hi = mid
			} else {
				lo = mid + 1
			}
		}
		return binomTail(x, n, p0, false) + binomTail(lo, n, p0, true)
	}
	// Last k in [0, floor(m)] with P(k) <= threshold (-1 if none).
	lo, hi := int64(-1), int64(math.Floor(m))
	for lo < hi {
		mid := hi - (hi-lo)/2
		if logd(mid) <= thr {
			lo = mid
		} else {
			hi = mid - 1
		}
	}
	return binomTail(lo, n, p0, false) + binomTail(x, n, p0, true)
}

// hyper is the hypergeometric distribution of the treatment's conversions
// given the margins of a 2x2 table: n1 treatment units, n2 control units, k
// conversions in all.
type hyper struct {
	n1, n2, k int64
	lo, hi    int64 // support
	mode      int64
	p         float64 // n1 / N, the binomial parameter of the decomposition
}

func newHyper(n1, n2, k int64) hyper {
	h := hyper{n1: n1, n2: n2, k: k}
	h.lo = max(0, k-n2)
	h.hi = min(n1, k)
	// The mode is floor((n1 + 1)(k + 1) / (N + 2)); big products are
	// computed in floating point and clamped to the support.
	h.mode = int64(math.Floor((float64(n1) + 1) * (float64(k) + 1) / (float64(n1+n2) + 2)))
	h.mode = min(max(h.mode, h.lo), h.hi)
	h.p = float64(n1) / float64(n1+n2)
	return h
}

// logPMF returns log P(A = a) as a product of binomial densities, each by
// Loader's method:
//
//	P(A = a) = b(a; k, p) b(n1 - a; N - k, p) / b(n1; N, p), p = n1/N.
func (h hyper) logPMF(a int64) float64 {
	if a < h.lo || a > h.hi {
		return math.Inf(-1)
	}
	q := 1 - h.p
	nn := float64(h.n1 + h.n2)
	return logDbinom(float64(a), float64(h.k), h.p, q) +
		logDbinom(float64(h.n1-a), nn-float64(h.k), h.p, q) -
		logDbinom(float64(h.n1), nn, h.p, q)
}

// up returns P(A = a + 1) / P(A = a).
func (h hyper) up(a int64) float64 {
	return (float64(h.n1-a) * float64(h.k-a)) / (float64(a+1) * float64(h.n2-h.k+a+1))
}

// sum returns P(from <= A <= to). It starts at the largest term of the
// range (the one nearest the mode), walks outward with the ratio of
// consecutive terms, and stops once a term no longer changes the sum, so
// the cost is a few standard deviations of terms whatever the table size
// and a tiny tail keeps its relative precision.
func (h hyper) sum(from, to int64) float64 {
	from, to = max(from, h.lo), min(to, h.hi)
	if from > to {
		return 0
	}
	start := min(max(h.mode, from), to)
	s, t := 1.0, 1.0
	for a := start; a < to; a++ {
		t *= h.up(a)
		s += t
		if t <= s*1e-17 {
			break
		}
	}
	t = 1
	for a := start; a > from; a-- {
		t /= h.up(a - 1)
		s += t
		if t <= s*1e-17 {
			break
		}
	}
	return s * math.Exp(h.logPMF(start))
}

// FisherExact returns Fisher's exact test of the 2x2 table
//
//	[[x1, n1 - x1],    treatment: converted, not converted
//	 [x2, n2 - x2]]    control
//
// conditional on its margins, under which the treatment's conversions A
// are hypergeometric:
//
//	P(A = a) = C(n1, a) C(n2, k - a) / C(n1 + n2, k),  k = x1 + x2
//	greater (odds ratio > 1, treatment higher): P(A >= x1)
//	less (odds ratio < 1):                      P(A <= x1)
//	two-sided: sum of P(A = a) over all a with P(A = a) <= (1 + 1e-7) P(A = x1)
//
// capped at 1; the two-sided rule (minimum likelihood, relative tolerance
// 1e-7) is R's fisher.test. H0: odds ratio 1 (p1 = p2). The terms are
// evaluated in log space by Loader's saddle-point method and summed from
// the mode outward, so tables with millions of units take microseconds.
//
// It makes no large-sample approximation; armtally uses it instead of
// [TwoProportionZTest] when [TwoSampleCondition] fails. Conditioning on
// both margins makes it conservative for a discrete outcome.
//
// Special cases: no conversions in either arm, or every unit converting,
// leaves a single table with the same margins, so p = 1 for every
// alternative; x1 = n1 with x2 = 0 gives the smallest possible p; n = 1 in
// an arm is allowed; n <= 0, x < 0 or x > n in either arm is an error
// wrapping [ErrBadCount]; alpha outside (0, 1) an error wrapping
// [ErrBadParameter].
//
// References:
//
//  1. Fisher RA (1935). The logic of inductive inference. Journal of the
//     Royal Statistical Society 98(1):39-82.
//  2. Agresti A (1992). A survey of exact inference for contingency tables.
//     Statistical Science 7(1):131-153.
//  3. Loader C (2000). Fast and accurate computation of binomial
//     probabilities. Technical report, Bell Laboratories.
func FisherExact(x1, n1, x2, n2 int64, alpha float64, alt Alternative) (ExactTest, error) {
	const method = "Fisher's exact test"
	if err := checkTwo(x1, n1, x2, n2); err != nil {
		return ExactTest{}, fmt.Errorf("fisher's exact test: %w", err)
	}
	if err := checkTest(alpha, alt); err != nil {
		return ExactTest{}, fmt.Errorf("fisher's exact test: %w", err)
	}
	h := newHyper(n1, n2, x1+x2)
	var p float64
	switch alt {
	case Greater:
		p = h.sum(x1, h.hi)
	case Less:
		p = h.sum(h.lo, x1)
	default:
		p = h.twoSided(x1)
	}
	p = clip(p, 0, 1)
	return ExactTest{Method: method, PValue: p, Alpha: alpha, Alternative: alt, Reject: p <= alpha}, nil
}

// twoSided applies the minimum-likelihood rule: the qualifying outcomes are
// a left tail [lo, L] and a right tail [R, hi], found by bisection since the
// probabilities rise up to the mode and fall after it.
func (h hyper) twoSided(a int64) float64 {
	thr := h.logPMF(a) + math.Log(relErr)
	// L: last index in [lo, mode] with logPMF <= thr (lo-1 if none).
	l, r := h.lo-1, h.mode
	for l < r {
		mid := r - (r-l)/2
		if h.logPMF(mid) <= thr {
			l = mid
		} else {
			r = mid - 1
		}
	}
	left := l
	// R: first index in [mode, hi] with logPMF <= thr (hi+1 if none).
	l, r = h.mode, h.hi+1
	for l < r {
		mid := l + (r-l)/2
		if h.logPMF(mid) <= thr {
			r = mid
		} else {
			l = mid + 1
		}
	}
	right := l
	if left+1 >= right {
		return 1
	}
	return h.sum(h.lo, left) + h.sum(right, h.hi)
}
