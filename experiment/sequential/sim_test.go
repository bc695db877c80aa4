package sequential

import (
	"flag"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

var longSim = flag.Bool("long", false, "run the sequential simulations at 40,000 experiments instead of 2,000")

// simSetting is one simulated monitoring scenario: two arms of equal size,
// each gaining step units between looks, converting at control and
// treatment; the planned units per arm are looks * step, so look j is at
// information fraction j / looks.
type simSetting struct {
	looks, step        int
	control, treatment float64
	alpha              float64
	seed               uint64
}

// simCounts is how many of runs simulated experiments each method
// rejected at some look (two-sided, at alpha).
type simCounts struct {
	runs int
	// peeked: the fixed-horizon pooled z test read at every look;
	// final: the same test read once, at the last look only.
	peeked, final int
	obf, pocock   int
	// mixture: the always-valid mixture test with tau^2 tuned to the
	// planned units at the control rate.
	mixture int
}

func (c simCounts) rate(k int) float64 { return float64(k) / float64(c.runs) }

// simFractions returns the information fractions 1/looks, ..., 1.
func simFractions(looks int) []float64 {
	f := make([]float64, looks)
	for j := range f {
		f[j] = float64(j+1) / float64(looks)
	}
	return f
}

// simulate runs s runs times with its seed and counts the rejections of
// each method.
func simulate(t testing.TB, s simSetting, runs int) simCounts {
	t.Helper()
	fractions := simFractions(s.looks)
	obf, err := Boundaries(Spending{OBrienFleming, s.alpha}, TwoSided, fractions)
	if err != nil {
		t.Fatal(err)
	}
	pocock, err := Boundaries(Spending{Pocock, s.alpha}, TwoSided, fractions)
	if err != nil {
		t.Fatal(err)
	}
	tau2, err := TunedMixingVariance(s.alpha, 2*s.control*(1-s.control)/float64(s.looks*s.step))
	if err != nil {
		t.Fatal(err)
	}
	mix := Mixture{Tau2: tau2, Alpha: s.alpha}
	src := rand.NewPCG(s.seed, 14)
	drawT := distuv.Binomial{N: float64(s.step), P: s.treatment, Src: src}
	drawC := distuv.Binomial{N: float64(s.step), P: s.control, Src: src}
	zCrit := distuv.UnitNormal.Quantile(1 - s.alpha/2)
	c := simCounts{runs: runs}
	est := make([]Estimate, s.looks)
	for range runs {
		var x1, x2, n int64
		var anyPeek, anyOBF, anyPocock bool
		z := 0.0
		for j := range s.looks {
			x1 += int64(drawT.Rand())
			x2 += int64(drawC.Rand())
			n += int64(s.step)
			pool := float64(x1+x2) / float64(2*n)
			z = 0
			if se := math.Sqrt(pool * (1 - pool) * 2 / float64(n)); se > 0 {
				z = (float64(x1) - float64(x2)) / float64(n) / se
			}
			anyPeek = anyPeek || math.Abs(z) >= zCrit
			anyOBF = anyOBF || obf.Crossed(j+1, z)
			anyPocock = anyPocock || pocock.Crossed(j+1, z)
			if est[j], err = ProportionsDifference(x1, n, x2, n); err != nil {
				t.Fatal(err)
			}
		}
		m, err := mix.Monitor(est)
		if err != nil {
			t.Fatal(err)
		}
		c.peeked += b2i(anyPeek)
		c.final += b2i(math.Abs(z) >= zCrit)
		c.obf += b2i(anyOBF)
		c.pocock += b2i(anyPocock)
		c.mixture += b2i(m[s.looks-1].Rejected)
	}
	return c
}

func b2i(b bool) int {
	if b {
		return 1
	}
	return 0
}

// aaSetting is the A/A scenario of the simulations: both arms at 10%, 500
// new units per arm between looks, 30 looks (15,000 units per arm),
// alpha 0.05 two-sided.
func aaSetting() simSetting {
	return simSetting{looks: 30, step: 500, control: 0.1, treatment: 0.1, alpha: 0.05, seed: 20261205}
}

// TestSimulationH0 simulates A/A experiments (aaSetting) and counts how
// often each method ever declares a difference at alpha = 0.05 two-sided:
//   - the fixed-horizon z test read at every look (pooled variance),
//     which repeated looks inflate well above alpha (Armitage, McPherson
//     and Rowe 1969);
//   - the O'Brien-Fleming- and Pocock-type group-sequential tests on the
//     same z statistics, which hold alpha up to Monte Carlo error;
//   - the always-valid mixture test (tau^2 tuned to the last look), whose
//     chance of ever rejecting is at most alpha (Ville's inequality; the
//     discrete looks make it smaller).
//
// The bounds allow four Monte Carlo standard errors. -long runs 40,000
// experiments instead of 2,000; the build-tagged TestSimulationTable
// (sim_table_test.go) adds power and the normal-theory values.
func TestSimulationH0(t *testing.T) {
	runs := 2000
	if *longSim {
		runs = 40000
	}
	s := aaSetting()
	c := simulate(t, s, runs)
	alpha := s.alpha
	se := math.Sqrt(alpha * (1 - alpha) / float64(runs))
	t.Logf("%d A/A experiments, %d looks: ever significant: fixed-horizon z %.4f, O'Brien-Fleming %.4f, Pocock %.4f, mixture %.4f (alpha %v, MC s.e. %.4f)",
		runs, s.looks, c.rate(c.peeked), c.rate(c.obf), c.rate(c.pocock), c.rate(c.mixture), alpha, se)
	if c.rate(c.peeked) <= alpha+4*se {
		t.Errorf("the peeked fixed-horizon test's rate %.4f is not above alpha", c.rate(c.peeked))
	}
	for _, m := range []struct {
		name string
		k    int
	}{{"O'Brien-Fleming", c.obf}, {"Pocock", c.pocock}} {
		if math.Abs(c.rate(m.k)-alpha) > 4*se {
			t.Errorf("the %s rate %.4f is not alpha within Monte Carlo error", m.name, c.rate(m.k))
		}
	}
	if c.rate(c.mixture) > alpha+4*se {
		t.Errorf("the mixture rate %.4f exceeds alpha", c.rate(c.mixture))
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
