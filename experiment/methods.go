package experiment

import (
	"fmt"

	"github.com/armtally/armtally/experiment/stats"
)

// methods holds the interval and test methods an analysis uses.
type methods struct {
	single IntervalMethod
	diff   DifferenceMethod
	ni     stats.NonInferiorityMethod
}

// rate returns the interval of one arm's rate.
func (m methods) rate(x, n int64, level float64) (stats.Interval, error) {
	switch m.single {
	case IntervalClopperPearson:
		return stats.ClopperPearson(x, n, level)
	case IntervalAgrestiCoull:
		return stats.AgrestiCoull(x, n, level)
	case IntervalWald:
		return stats.WaldInterval(x, n, level)
	}
	return stats.Wilson(x, n, level)
}

// difference returns the interval of p1 - p2.
func (m methods) difference(x1, n1, x2, n2 int64, level float64) (stats.Interval, error) {
	if m.diff == DifferenceWald {
		return stats.WaldDifference(x1, n1, x2, n2, level)
	}
	return stats.NewcombeDifference(x1, n1, x2, n2, level)
}

// names returns the printed names of the rate and the difference
// intervals, as the stats package gives them.
func (m methods) names() (rate, difference string, err error) {
	r, err := m.rate(1, 2, 0.95)
	if err != nil {
		return "", "", err
	}
	d, err := m.difference(1, 2, 1, 2, 0.95)
	return r.Method, d.Method, err
}

// armRate returns one arm's rate of one metric with its interval.
func (m methods) armRate(arm string, c Count, level float64) (ArmRate, error) {
	ar := ArmRate{Arm: arm, Units: c.Units, Conversions: c.Conversions, Immature: c.Immature}
	if c.Units == 0 {
		return ar, nil
	}
	rate := float64(c.Conversions) / float64(c.Units)
	ar.Rate = &rate
	iv, err := m.rate(c.Conversions, c.Units, level)
	if err != nil {
		return ar, fmt.Errorf("arm %q: %w", arm, err)
	}
	ar.Interval = interval(iv, iv.Method)
	return ar, nil
}

// errorRate says what an adjustment controls at alpha.
func errorRate(a stats.AdjustMethod) string {
	switch a {
	case stats.Bonferroni, stats.Holm, stats.Hochberg:
		return "family-wise error rate"
	case stats.BenjaminiHochberg, stats.BenjaminiYekutieli:
		return "false discovery rate"
	}
	return "per comparison"
}

// familyText describes each family of adjusted comparisons.
var familyText = [...]string{
	Primary:   "each treatment against the control on each primary metric (the confirmatory family; secondary metrics are adjusted in a family of their own, and target-rate tests and guardrail tests are outside both)",
	Secondary: "each treatment against the control on each secondary metric (adjusted apart from the confirmatory family; these comparisons never change a decision)",
}

// adjust applies the multiple-comparison adjustment to the family of
// role: every comparison with a test on a metric of that role that is not
// a guardrail. The p-value adjusted is that of the test relied on (the z
// test, or the exact test where the normal approximation is not
// justified). Each comparison in the family gets its Adjusted record and
// its Significant becomes the adjusted decision. With Bonferroni, the
// simultaneous difference interval at level 1 - (1 - level)/m is added.
func adjust(metrics []MetricReadout, role Role, method stats.AdjustMethod, so stats.Options, meth methods) (Multiplicity, error) {
	type ref struct{ m, c int }
	var refs []ref
	var ps []float64
	for mi := range metrics {
		if metrics[mi].Guardrail != nil || metrics[mi].Role != role {
			continue
		}
		for ci := range metrics[mi].Comparisons {
			c := &metrics[mi].Comparisons[ci]
			switch {
			case c.DecidedBy == DecidedByExact && c.Exact != nil:
				ps = append(ps, c.Exact.PValue)
			case c.Z != nil:
				ps = append(ps, c.Z.PValue)
			default:
				continue
			}
			refs = append(refs, ref{mi, ci})
		}
	}
	mult := Multiplicity{Role: role, Method: method.String(), ErrorRate: errorRate(method), Family: familyText[role], Size: len(refs)}
	adj, err := stats.AdjustPValues(ps, method)
	if err != nil {
		return mult, fmt.Errorf("multiple comparisons: %w", err)
	}
	for i, r := range refs {
		c := &metrics[r.m].Comparisons[r.c]
		a := &Adjusted{Family: role, Method: method.String(), FamilySize: len(refs), PValue: adj[i], Significant: adj[i] <= so.Alpha}
		if method == stats.Bonferroni {
			level := 1 - (1-so.Level)/float64(len(refs))
			arms := metrics[r.m].Arms
			t, ctl := rateOf(arms, c.Treatment), rateOf(arms, c.Control)
			iv, err := meth.difference(t.Conversions, t.Units, ctl.Conversions, ctl.Units, level)
			if err != nil {
				return mult, fmt.Errorf("multiple comparisons: %w", err)
			}
			a.DifferenceInterval = interval(iv, iv.Method+", Bonferroni")
		}
		c.Adjusted = a
		c.Significant = a.Significant
	}
	return mult, nil
}

func rateOf(arms []ArmRate, name string) ArmRate {
	for _, a := range arms {
		if a.Arm == name {
			return a
		}
	}
	return ArmRate{}
}

// nonInferiority tests a guardrail: H0 says the treatment is worse than the
// control by the margin or more. For a higher-is-better metric that is
// p_t - p_c <= -margin; for a lower-is-better one p_t - p_c >= margin, which
// is the same test with the arms swapped, reported as the one-sided test
// "less" of z = (d - margin)/se on the treatment-minus-control scale. A
// relative margin is taken as a
// share of the control's observed rate. The test is one-sided at alpha; its
// interval is the difference interval at 1 - 2 alpha, whose bound on the
// harmful side is the one-sided bound compared with the margin.
func nonInferiority(tc, cc Count, g Margin, lowerIsBetter bool, so stats.Options, meth methods) (*NonInferiorityTest, error) {
	margin := g.Value
	var warnings []Warning
	if g.Relative {
		margin = g.Value * float64(cc.Conversions) / float64(cc.Units)
		if cc.Conversions == 0 {
			warnings = append(warnings, Warning{Code: WarnRelativeMarginZero})
		}
	}
	x1, n1, x2, n2 := tc.Conversions, tc.Units, cc.Conversions, cc.Units
	if lowerIsBetter {
		x1, n1, x2, n2 = x2, n2, x1, n1
	}
	z, err := stats.NonInferiorityZTest(x1, n1, x2, n2, margin, so.Alpha, meth.ni)
	if err != nil {
		return nil, err
	}
	if len(z.Warnings) > 0 {
		warnings = append(warnings, Warning{Code: WarnNonInferiorityUndefined})
	}
	if ok, _ := stats.TwoSampleCondition(tc.Conversions, tc.Units, cc.Conversions, cc.Units, so.MinCount); !ok {
		warnings = append(warnings, Warning{Code: WarnNonInferiorityNoFallback, MinCount: so.MinCount})
	}
	iv, err := meth.difference(tc.Conversions, tc.Units, cc.Conversions, cc.Units, 1-2*so.Alpha)
	if err != nil {
		return nil, err
	}
	zt := test(z)
	if lowerIsBetter {
		// Report the test on the treatment-minus-control scale:
		// z = (d - margin)/se against H1: d < margin, the mirror image of
		// the swapped test; the p-value and the decision are unchanged.
		zt.Statistic = -zt.Statistic
		zt.Alternative = stats.Less.String()
	}
	return &NonInferiorityTest{
		AbsoluteMargin: margin,
		Z:              zt,
		NonInferior:    z.RejectByPValue,
		Interval:       interval(iv, iv.Method),
		Warnings:       warnings,
	}, nil
}
