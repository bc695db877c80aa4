package monitor

import (
	"fmt"
	"math"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/history"
	"github.com/armtally/armtally/experiment/sequential"
)

// groupSequential tests one comparison against its Lan-DeMets boundary:
// the information fraction is the smaller arm's units on the metric over
// the planned units per arm; the boundary of look j is computed from the
// fractions of the comparison's group-sequential looks 1..j
// (sequential.Boundaries), so a look never moves an earlier boundary.
func groupSequential(sc experiment.SequentialComparison, r experiment.Readout, mr experiment.MetricReadout, c experiment.Comparison, meth Method, s Settings, earlier []history.Look) (experiment.SequentialComparison, error) {
	sc.Method = experiment.MethodGroupSequential
	kind := sequential.OBrienFleming
	if meth == Pocock {
		kind = sequential.Pocock
	}
	sp := sequential.Spending{Kind: kind, Alpha: sc.Alpha}
	sc.Spending = kind.String()
	sides, sign := sidesOf(r.Settings.Alternative)
	sc.Sides = sides.String()
	if s.PlannedUnits <= 0 {
		return sc, fmt.Errorf("a group-sequential test needs the planned units per arm")
	}
	var fractions, zs []float64
	for _, l := range earlier {
		cl, ok := lookComparison(l, mr.Name, c.Treatment)
		if ok && cl.Method == experiment.MethodGroupSequential && !math.IsNaN(cl.InformationFraction) {
			fractions = append(fractions, cl.InformationFraction)
			zs = append(zs, cl.Statistic)
		}
	}
	sc.Look = len(fractions) + 1
	nt, _, _ := armCounts(mr, c.Treatment)
	nc, _, _ := armCounts(mr, c.Control)
	t := float64(min(nt, nc)) / float64(s.PlannedUnits)
	sc.InformationFraction = ptr(t)
	if c.Z == nil {
		sc.NotTested = "no z statistic (an arm without units or without variance)"
		return sc, nil
	}
	z := sign * c.Z.Statistic
	sc.Statistic = ptr(z)
	if t <= 0 || len(fractions) > 0 && t <= fractions[len(fractions)-1] {
		sc.NotTested = fmt.Sprintf("the information fraction %.4g did not grow since the previous look (units removed by a data fix?)", t)
		sc.InformationFraction = nil
		return sc, nil
	}
	b, err := sequential.Boundaries(sp, sides, append(fractions, t))
	if err != nil {
		return sc, err
	}
	lk := b.Looks[sc.Look-1]
	sc.AlphaSpent, sc.Boundary, sc.BoundaryP = ptr(lk.Spent), ptr(lk.Critical), ptr(lk.NominalP)
	sc.Crossed = b.Crossed(sc.Look, z)
	sc.CrossedAtLook = b.FirstCrossing(append(zs, z))
	return sc, nil
}

// mixture runs the always-valid mixture test over the comparison's counts
// at every earlier look that holds them and at this one
// (sequential.Mixture.Monitor), two-sided at the comparison's alpha.
func mixture(sc experiment.SequentialComparison, mr experiment.MetricReadout, s Settings, earlier []history.Look) (experiment.SequentialComparison, error) {
	sc.Method = experiment.MethodMixture
	sc.Sides = sequential.TwoSided.String()
	tau2 := s.MixingVariance
	if tau2 == 0 {
		tau2 = sequential.DefaultMixingVariance
	}
	sc.MixingVariance = ptr(tau2)
	var ests []sequential.Estimate
	for _, l := range earlier {
		n1, x1, ok1 := lookCounts(l, mr.Name, sc.Treatment)
		n2, x2, ok2 := lookCounts(l, mr.Name, sc.Control)
		if !ok1 || !ok2 {
			continue
		}
		if e, err := sequential.ProportionsDifference(x1, n1, x2, n2); err == nil {
			ests = append(ests, e)
		}
	}
	n1, x1, _ := armCounts(mr, sc.Treatment)
	n2, x2, _ := armCounts(mr, sc.Control)
	e, err := sequential.ProportionsDifference(x1, n1, x2, n2)
	if err != nil {
		sc.Look = len(ests) + 1
		sc.NotTested = "an arm without units"
		return sc, nil
	}
	ests = append(ests, e)
	sc.Look = len(ests)
	if s.PlannedUnits > 0 {
		sc.InformationFraction = ptr(float64(min(n1, n2)) / float64(s.PlannedUnits))
	}
	out, err := sequential.Mixture{Tau2: tau2, Alpha: sc.Alpha}.Monitor(ests)
	if err != nil {
		return sc, err
	}
	last := out[len(out)-1]
	if last.Variance > 0 {
		sc.Statistic = ptr(last.Difference / math.Sqrt(last.Variance))
	}
	sc.AlwaysValidP = ptr(last.P)
	sc.SequenceLower, sc.SequenceUpper = ptr(last.SequenceLower), ptr(last.SequenceUpper)
	sc.Crossed = last.Rejected
	rejected := make([]bool, len(out))
	for i, o := range out {
		rejected[i] = o.Rejected
	}
	sc.CrossedAtLook = firstRejected(rejected)
	return sc, nil
}
