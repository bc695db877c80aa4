//go:build simulation

// The long simulation of the monitoring methods, not part of the default
// test run:
//
//	go test -tags simulation -run SimulationTable -v ./experiment/sequential/
//
// It prints the Markdown table kept in experiment/stats/SIMULATION.md
// ("Monitoring: 30 nightly looks").
package sequential

import (
	"flag"
	"fmt"
	"math"
	"strings"
	"testing"
	"time"
)

var tableRuns = flag.Int("runs", 40000, "simulated experiments per scenario in TestSimulationTable")

// normalTheory returns the chance of ever crossing the two-sided critical
// values at the fractions when the look statistics have drift theta,
// by the numerical integration of CrossingProbabilities.
func normalTheory(t *testing.T, fractions, critical []float64, theta float64) float64 {
	t.Helper()
	up, lo, err := CrossingProbabilities(TwoSided, fractions, critical, theta)
	if err != nil {
		t.Fatal(err)
	}
	sum := 0.0
	for j := range up {
		sum += up[j] + lo[j]
	}
	return sum
}

// TestSimulationTable runs the A/A scenario (aaSetting: 10% in both arms,
// 500 units per arm a day, 30 daily looks) and the same with the treatment
// at 11% (a 10% relative lift), *tableRuns experiments each, and prints
// for each method the rate of ever rejecting with its Monte Carlo standard
// error, beside the same rate computed by numerical integration of the
// look statistics taken as jointly normal (Armitage, McPherson and Rowe
// 1969; Jennison and Turnbull 2000, chapter 19): an independent route to
// the same number for every method but the mixture test.
//
// Asserted: each simulated rate is within four Monte Carlo standard errors
// plus 0.005 (for the normal approximation of binomial counts) of its
// normal-theory value; under A/A the peeked test is above alpha and the
// mixture test at most alpha plus four standard errors.
func TestSimulationTable(t *testing.T) {
	start := time.Now()
	h0 := aaSetting()
	h1 := h0
	h1.treatment, h1.seed = 0.11, h0.seed+1
	fractions := simFractions(h0.looks)
	n := float64(h0.looks * h0.step)
	v1 := (h1.treatment*(1-h1.treatment) + h1.control*(1-h1.control)) / n
	theta := (h1.treatment - h1.control) / math.Sqrt(v1) // drift at t = 1
	crit := func(k SpendingKind) []float64 {
		b, err := Boundaries(Spending{k, h0.alpha}, TwoSided, fractions)
		if err != nil {
			t.Fatal(err)
		}
		c := make([]float64, len(b.Looks))
		for j, l := range b.Looks {
			c[j] = l.Critical
		}
		return c
	}
	z := 1.959963984540054 // Phi^-1(0.975)
	peek := make([]float64, h0.looks)
	final := make([]float64, h0.looks)
	for j := range peek {
		peek[j], final[j] = z, math.Inf(1)
	}
	final[h0.looks-1] = z
	methods := []struct {
		name string
		crit []float64
		get  func(simCounts) int
	}{
		{"fixed-horizon z, read every night", peek, func(c simCounts) int { return c.peeked }},
		{"fixed-horizon z, read once at night 30", final, func(c simCounts) int { return c.final }},
		{"O'Brien-Fleming-type spending", crit(OBrienFleming), func(c simCounts) int { return c.obf }},
		{"Pocock-type spending", crit(Pocock), func(c simCounts) int { return c.pocock }},
		{"mixture SPRT (tau^2 tuned to night 30)", nil, func(c simCounts) int { return c.mixture }},
	}
	c0 := simulate(t, h0, *tableRuns)
	c1 := simulate(t, h1, *tableRuns)
	var out strings.Builder
	fmt.Fprintf(&out, "| method | A/A: ever significant | normal theory | 11%% vs 10%%: power | normal theory |\n|---|---|---|---|---|\n")
	cell := func(c simCounts, k int) string {
		p := c.rate(k)
		return fmt.Sprintf("%.4f ± %.4f", p, math.Sqrt(p*(1-p)/float64(c.runs)))
	}
	check := func(name string, c simCounts, k int, want float64) {
		p := c.rate(k)
		if tol := 4*math.Sqrt(want*(1-want)/float64(c.runs)) + 0.005; math.Abs(p-want) > tol {
			t.Errorf("%s: simulated %.4f, normal theory %.4f (tolerance %.4f)", name, p, want, tol)
		}
	}
	for _, m := range methods {
		th0, th1 := "—", "—"
		if m.crit != nil {
			a, b := normalTheory(t, fractions, m.crit, 0), normalTheory(t, fractions, m.crit, theta)
			th0, th1 = fmt.Sprintf("%.4f", a), fmt.Sprintf("%.4f", b)
			check(m.name+" (A/A)", c0, m.get(c0), a)
			check(m.name+" (power)", c1, m.get(c1), b)
		}
		fmt.Fprintf(&out, "| %s | %s | %s | %s | %s |\n", m.name, cell(c0, m.get(c0)), th0, cell(c1, m.get(c1)), th1)
	}
	se := math.Sqrt(h0.alpha * (1 - h0.alpha) / float64(c0.runs))
	if c0.rate(c0.peeked) <= h0.alpha+4*se {
		t.Errorf("the peeked fixed-horizon rate %.4f is not above alpha", c0.rate(c0.peeked))
	}
	if c0.rate(c0.mixture) > h0.alpha+4*se {
		t.Errorf("the mixture rate %.4f exceeds alpha", c0.rate(c0.mixture))
	}
	t.Logf("%d experiments per scenario, seeds %d (A/A) and %d (11%% vs 10%%), drift theta %.4f, %s\n%s",
		c0.runs, h0.seed, h1.seed, theta, time.Since(start).Round(time.Millisecond), out.String())
}
