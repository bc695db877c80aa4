package sequential

import (
	"errors"
	"math"
	"testing"

	"gonum.org/v1/gonum/integrate/quad"
)

// TestMixtureClosedForm checks the closed-form mixture likelihood ratio
// against direct numerical integration (gonum's quad.Fixed, Gauss-Legendre
// with 400 nodes over 14 posterior standard deviations each side of the
// posterior mean) of the likelihood ratio of a N(theta, V) estimate,
// exp(((d - theta_0)^2 - (d - theta)^2) / (2V)), against the N(theta_0,
// tau^2) mixing density: the definition of Lambda (Robbins 1970; Johari et
// al. 2017). The integrand is scaled by its largest value, so large ratios
// do not overflow.
func TestMixtureClosedForm(t *testing.T) {
	cases := []struct {
		diff, v, tau2, null float64
	}{
		{0, 1e-5, 1e-4, 0},
		{0.01, 1e-5, 1e-4, 0},
		{-0.012, 1e-5, 1e-4, 0},
		{0.003, 1e-6, 1e-4, 0},   // V much smaller than tau^2
		{0.02, 1e-3, 1e-6, 0},    // V much larger than tau^2
		{0.05, 2e-4, 4e-4, 0.01}, // a non-zero null
		{-0.3, 4e-3, 1e-2, -0.1},
		{0.001, 1e-8, 1e-4, 0}, // z = 10
	}
	for _, c := range cases {
		m := Mixture{Tau2: c.tau2, Alpha: 0.05, Null: c.null}
		logLR := func(theta float64) float64 {
			a, b := c.diff-c.null, c.diff-theta
			return (a*a - b*b) / (2 * c.v)
		}
		logPrior := func(theta float64) float64 {
			d := theta - c.null
			return -d*d/(2*c.tau2) - 0.5*math.Log(2*math.Pi*c.tau2)
		}
		postMean := c.null + c.tau2/(c.v+c.tau2)*(c.diff-c.null)
		postSD := math.Sqrt(c.v * c.tau2 / (c.v + c.tau2))
		peak := logLR(postMean) + logPrior(postMean)
		integral := quad.Fixed(func(theta float64) float64 {
			return math.Exp(logLR(theta) + logPrior(theta) - peak)
		}, postMean-14*postSD, postMean+14*postSD, 400, quad.Legendre{}, 0)
		want := peak + math.Log(integral)
		got := m.LogLikelihoodRatio(c.diff, c.v)
		if math.Abs(got-want) > 1e-9*math.Max(1, math.Abs(want)) {
			t.Errorf("%+v: log Lambda %.12g, numerical integration %.12g", c, got, want)
		}
	}
}

// TestMixtureDuality checks that the confidence interval of a look is the
// set of null differences the test does not reject: at the interval's ends
// Lambda is exactly 1/alpha (a property of the definitions in Johari et
// al. 2017, section 4, and Howard et al. 2021).
func TestMixtureDuality(t *testing.T) {
	for _, c := range []struct{ diff, v, tau2, alpha float64 }{
		{0.01, 1e-5, 1e-4, 0.05},
		{-0.02, 3e-5, 1e-5, 0.01},
		{0.1, 1e-3, 1e-2, 0.1},
	} {
		m := Mixture{Tau2: c.tau2, Alpha: c.alpha}
		w := m.HalfWidth(c.v)
		for _, end := range []float64{c.diff - w, c.diff + w} {
			m.Null = end
			if got := m.LogLikelihoodRatio(c.diff, c.v); math.Abs(got-math.Log(1/c.alpha)) > 1e-9 {
				t.Errorf("%+v: log Lambda at the interval's end %v is %.12g, want log(1/alpha) = %.12g", c, end, got, math.Log(1/c.alpha))
			}
		}
	}
}

// TestMixtureMonitor checks the running p-value and sequence on a short
// series of looks, with the expected values worked out by hand from the
// formulas of Johari et al. (2017): p is the running minimum of 1/Lambda
// capped at 1, and the sequence the running intersection.
func TestMixtureMonitor(t *testing.T) {
	m := Mixture{Tau2: 1e-4, Alpha: 0.05}
	looks := []Estimate{{0.01, 4e-5}, {0.02, 1e-5}, {0.0, 5e-6}, {0.0, 0}}
	got, err := m.Monitor(looks)
	if err != nil {
		t.Fatal(err)
	}
	p, lo, hi := 1.0, -1.0, 1.0
	for j, l := range looks {
		// Hand formula, written out again rather than calling the method.
		v, d := l.Variance, l.Difference
		var lr float64
		wl, wu := -1.0, 1.0
		if v > 0 {
			lr = math.Sqrt(v/(v+1e-4)) * math.Exp(1e-4*d*d/(2*v*(v+1e-4)))
			h := math.Sqrt(v * (v + 1e-4) / 1e-4 * (math.Log((v+1e-4)/v) + 2*math.Log(20)))
			wl, wu = d-h, d+h
		} else {
			lr = 1
		}
		p = math.Min(p, 1/lr)
		lo, hi = math.Max(lo, wl), math.Min(hi, wu)
		g := got[j]
		if math.Abs(g.P-p) > 1e-12 || math.Abs(g.SequenceLower-lo) > 1e-12 || math.Abs(g.SequenceUpper-hi) > 1e-12 {
			t.Errorf("look %d: p %v [%v, %v], want p %v [%v, %v]", j+1, g.P, g.SequenceLower, g.SequenceUpper, p, lo, hi)
		}
		if g.Rejected != (p <= 0.05) {
			t.Errorf("look %d: rejected %v with p %v", j+1, g.Rejected, p)
		}
	}
	// The second look has z = 0.02 / sqrt(1e-5) = 6.3: Lambda is
	// sqrt(1e-5/1.1e-4) exp(1e-4 * 4e-4 / (2e-5 * 1.1e-4)) = 0.3015 *
	// exp(18.18) > 1/0.05, so the null is rejected from then on.
	if !got[1].Rejected || !got[3].Rejected {
		t.Errorf("rejections %v %v %v %v, want false true true true", got[0].Rejected, got[1].Rejected, got[2].Rejected, got[3].Rejected)
	}
	if got[0].Rejected {
		t.Errorf("look 1 (z = 1.58) rejected")
	}
}

func TestMixtureBadInput(t *testing.T) {
	good := Mixture{Tau2: 1e-4, Alpha: 0.05}
	for _, c := range []struct {
		m     Mixture
		looks []Estimate
	}{
		{Mixture{Tau2: 0, Alpha: 0.05}, nil},
		{Mixture{Tau2: math.Inf(1), Alpha: 0.05}, nil},
		{Mixture{Tau2: 1e-4, Alpha: 1}, nil},
		{Mixture{Tau2: 1e-4, Alpha: 0.05, Null: 1}, nil},
		{good, []Estimate{{0, -1}}},
		{good, []Estimate{{math.NaN(), 1e-4}}},
		{good, []Estimate{{0, math.NaN()}}},
		{good, []Estimate{{1.5, 1e-4}}},
	} {
		if _, err := c.m.Monitor(c.looks); !errors.Is(err, ErrBadSetting) {
			t.Errorf("%+v %v: error %v, want ErrBadSetting", c.m, c.looks, err)
		}
	}
	for _, c := range [][4]int64{{1, 0, 1, 1}, {2, 1, 0, 1}, {-1, 5, 0, 5}, {0, 5, 6, 5}} {
		if _, err := ProportionsDifference(c[0], c[1], c[2], c[3]); !errors.Is(err, ErrBadSetting) {
			t.Errorf("counts %v: error %v", c, err)
		}
	}
}

// TestTunedMixingVariance checks the tuned tau^2 against its defining
// property: the half-width at the given variance is smallest there (a
// direct search over tau^2 on a fine grid), and at alpha = 0.05 the ratio
// tau^2 / v is 8.21 (the root of x = log(1 + x) + 2 log 20, worked out by
// hand: log(9.21) + 5.9915 = 8.2117).
func TestTunedMixingVariance(t *testing.T) {
	for _, c := range []struct{ alpha, v float64 }{{0.05, 1e-5}, {0.01, 3e-6}, {0.2, 1e-3}} {
		tau2, err := TunedMixingVariance(c.alpha, c.v)
		if err != nil {
			t.Fatal(err)
		}
		best := math.Inf(1)
		bestTau2 := 0.0
		for k := -2000; k <= 2000; k++ {
			t2 := tau2 * math.Exp(float64(k)*1e-4)
			if w := (Mixture{Tau2: t2, Alpha: c.alpha}).HalfWidth(c.v); w < best {
				best, bestTau2 = w, t2
			}
		}
		if math.Abs(bestTau2/tau2-1) > 2e-4 {
			t.Errorf("alpha %v v %v: tuned tau^2 %v, narrowest at %v", c.alpha, c.v, tau2, bestTau2)
		}
	}
	tau2, _ := TunedMixingVariance(0.05, 1)
	if math.Abs(tau2-8.2117) > 1e-3 {
		t.Errorf("tau^2 / v at alpha 0.05 = %v, want 8.2117", tau2)
	}
	if _, err := TunedMixingVariance(0.05, 0); !errors.Is(err, ErrBadSetting) {
		t.Errorf("variance 0: %v", err)
	}
}
