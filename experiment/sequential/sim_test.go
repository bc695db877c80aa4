package sequential

import (
	"flag"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

var longSim = flag.Bool("long", false, "run the sequential simulations at 40,000 experiments instead of 2,000")

// TestSimulationH0 simulates A/A experiments (both arms converting at 10%,
// 500 new units per arm between looks, 30 looks) and counts how often each
// method ever declares a difference at alpha = 0.05 two-sided:
//   - the fixed-horizon z test read at every look (pooled variance),
//     which repeated looks inflate well above alpha (Armitage, McPherson
//     and Rowe 1969);
//   - the O'Brien-Fleming-type group-sequential test on the same z
//     statistics, which holds alpha up to Monte Carlo error;
//   - the always-valid mixture test (tau^2 tuned to the last look), whose
//     chance of ever rejecting is at most alpha (Ville's inequality; the
//     discrete looks make it smaller).
//
// The bounds allow four Monte Carlo standard errors. -long runs 40,000
// experiments instead of 2,000.
func TestSimulationH0(t *testing.T) {
	runs := 2000
	if *longSim {
		runs = 40000
	}
	const (
		looks, step, p, alpha = 30, 500, 0.1, 0.05
	)
	fractions := make([]float64, looks)
	for j := range fractions {
		fractions[j] = float64(j+1) / looks
	}
	b, err := Boundaries(Spending{OBrienFleming, alpha}, TwoSided, fractions)
	if err != nil {
		t.Fatal(err)
	}
	tau2, err := TunedMixingVariance(alpha, 2*p*(1-p)/(looks*step))
	if err != nil {
		t.Fatal(err)
	}
	mix := Mixture{Tau2: tau2, Alpha: alpha}
	src := rand.NewPCG(20261205, 14)
	draw := distuv.Binomial{N: step, P: p, Src: src}
	zCrit := distuv.UnitNormal.Quantile(1 - alpha/2)
	var fixed, gs, mixed int
	for range runs {
		var x1, x2, n int64
		var anyFixed, anyGS bool
		est := make([]Estimate, looks)
		for j := range looks {
			x1 += int64(draw.Rand())
			x2 += int64(draw.Rand())
			n += step
			pool := float64(x1+x2) / float64(2*n)
			z := 0.0
			if se := math.Sqrt(pool * (1 - pool) * 2 / float64(n)); se > 0 {
				z = (float64(x1) - float64(x2)) / float64(n) / se
			}
			anyFixed = anyFixed || math.Abs(z) >= zCrit
			anyGS = anyGS || b.Crossed(j+1, z)
			if est[j], err = ProportionsDifference(x1, n, x2, n); err != nil {
				t.Fatal(err)
			}
		}
		m, err := mix.Monitor(est)
		if err != nil {
			t.Fatal(err)
		}
		if anyFixed {
			fixed++
		}
		if anyGS {
			gs++
		}
		if m[looks-1].Rejected {
			mixed++
		}
	}
	se := math.Sqrt(alpha * (1 - alpha) / float64(runs))
	rate := func(k int) float64 { return float64(k) / float64(runs) }
	t.Logf("%d A/A experiments, %d looks: ever significant: fixed-horizon z %.4f, group-sequential %.4f, mixture %.4f (alpha %v, MC s.e. %.4f)",
		runs, looks, rate(fixed), rate(gs), rate(mixed), alpha, se)
	if rate(fixed) <= alpha+4*se {
		t.Errorf("the peeked fixed-horizon test's rate %.4f is not above alpha", rate(fixed))
	}
	if math.Abs(rate(gs)-alpha) > 4*se {
		t.Errorf("the group-sequential rate %.4f is not alpha within Monte Carlo error", rate(gs))
	}
	if rate(mixed) > alpha+4*se {
		t.Errorf("the mixture rate %.4f exceeds alpha", rate(mixed))
	}
}

// TestSimulationCoverage checks the confidence sequence under an effect
// (treatment 11%, control 10%): the chance that the running intersection
// ever excludes the true difference is at most alpha (Howard et al. 2021),
// within four Monte Carlo standard errors.
func TestSimulationCoverage(t *testing.T) {
	runs := 2000
	if *longSim {
		runs = 40000
	}
	const looks, step, alpha = 30, 500, 0.05
	mix := Mixture{Tau2: DefaultMixingVariance, Alpha: alpha}
	src := rand.NewPCG(20261205, 15)
	d1 := distuv.Binomial{N: step, P: 0.11, Src: src}
	d2 := distuv.Binomial{N: step, P: 0.10, Src: src}
	missed := 0
	for range runs {
		var x1, x2, n int64
		est := make([]Estimate, looks)
		for j := range looks {
			x1 += int64(d1.Rand())
			x2 += int64(d2.Rand())
			n += step
			est[j], _ = ProportionsDifference(x1, n, x2, n)
		}
		m, err := mix.Monitor(est)
		if err != nil {
			t.Fatal(err)
		}
		last := m[looks-1]
		if last.Empty || last.SequenceLower > 0.01 || last.SequenceUpper < 0.01 {
			missed++
		}
	}
	rate := float64(missed) / float64(runs)
	se := math.Sqrt(alpha * (1 - alpha) / float64(runs))
	t.Logf("%d experiments: the confidence sequence ever missed the true difference in %.4f", runs, rate)
	if rate > alpha+4*se {
		t.Errorf("miss rate %.4f exceeds alpha", rate)
	}
}
