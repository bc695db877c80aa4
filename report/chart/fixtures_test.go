package chart

import "github.com/armtally/armtally/experiment"

// The readouts the chart tests draw, cut to the fields the chart reads.
// Every value is report's fixture of the same name (report/fixtures_test.go,
// guardrailReadout), printed by report/testdata/fixtures.R (R 4.x: Newcombe
// 1998 method 10 for the intervals, the Farrington-Manning test for the
// guardrails); the comment beside each names its call.

func ptr[T any](v T) *T { return &v }

func ivAt(lo, hi, level float64) *experiment.Interval {
	return &experiment.Interval{Lower: lo, Upper: hi, Level: level, Method: "Newcombe hybrid score"}
}

// guardrailReadout is a three-arm experiment under Bonferroni's
// adjustment: reorder with simultaneous 97.5% intervals; repeat_visit, a
// guardrail with a relative margin of 3% (of the control's 40%: 1.2
// points), higher is better; unsubscribe, a guardrail with an absolute
// margin of half a point, lower is better. The guardrails' intervals are
// Newcombe's at 1 - 2 alpha = 90%.
func guardrailReadout() experiment.Readout {
	cmp := func(arm string, d, lo, hi float64) experiment.Comparison {
		return experiment.Comparison{Treatment: arm, Control: "control", Difference: ptr(d), DifferenceInterval: ivAt(lo, hi, 0.95)}
	}
	simultaneous := func(c experiment.Comparison, lo, hi float64) experiment.Comparison {
		c.Adjusted = &experiment.Adjusted{Method: "bonferroni", FamilySize: 2, DifferenceInterval: ivAt(lo, hi, 0.975)}
		return c
	}
	guardrail := func(c experiment.Comparison, margin, lo, hi float64) experiment.Comparison {
		c.NonInferiority = &experiment.NonInferiorityTest{AbsoluteMargin: margin, Interval: ivAt(lo, hi, 0.9)}
		return c
	}
	return experiment.Readout{
		Experiment: "reorder-reminder",
		Control:    "control",
		Metrics: []experiment.MetricReadout{
			{Name: "reorder", Comparisons: []experiment.Comparison{
				// fixtures.R: compare("email reorder", 2530, 23870, 2281, 24010),
				// simultaneous("email reorder", 2530, 23870, 2281, 24010, 2)
				simultaneous(cmp("email-reminder", 0.010988700944498928, 0.0056033119374663022, 0.016376794301743838),
					0.0048298401559486275, 0.017151097364467866),
				// fixtures.R: compare("push reorder", 2430, 24120, 2281, 24010),
				// simultaneous("push reorder", 2430, 24120, 2281, 24010, 2)
				simultaneous(cmp("push-reminder", 0.0057441861910770969, 0.00043437226979455533, 0.011054455323376601),
					-0.00032844401833117317, 0.01181741125638253),
			}},
			{Name: "repeat_visit", Guardrail: &experiment.Guardrail{Margin: 0.03, Relative: true}, Comparisons: []experiment.Comparison{
				// fixtures.R: compare("email repeat_visit", 9500, 23870, 9604, 24010),
				// noninf("email repeat_visit", 9500, 23870, 9604, 24010, 0.03, relative = TRUE)
				guardrail(cmp("email-reminder", -0.0020108923334730133, -0.010782444281688544, 0.0067612974612887445),
					0.012, -0.0093724135678010141, 0.0053510781645547756),
				// fixtures.R: compare("push repeat_visit", 9700, 24120, 9604, 24010),
				// noninf("push repeat_visit", 9700, 24120, 9604, 24010, 0.03, relative = TRUE)
				guardrail(cmp("push-reminder", 0.0021558872305140753, -0.0066010629117615651, 0.010912217513500853),
					0.012, -0.005193294480465448, 0.0095046323485920847),
			}},
			{Name: "unsubscribe", LowerIsBetter: true, Guardrail: &experiment.Guardrail{Margin: 0.005}, Comparisons: []experiment.Comparison{
				// fixtures.R: compare("email unsubscribe", 650, 23870, 480, 24010),
				// noninf("email unsubscribe", 650, 23870, 480, 24010, 0.005, lower_is_better = TRUE)
				guardrail(cmp("email-reminder", 0.0072391635450038509, 0.0045229919076182554, 0.0099708229693904766),
					0.005, 0.004959647578032942, 0.0095295964395909587),
				// fixtures.R: compare("push unsubscribe", 500, 24120, 480, 24010),
				// noninf("push unsubscribe", 500, 24120, 480, 24010, 0.005, lower_is_better = TRUE)
				guardrail(cmp("push-reminder", 0.00073801477134665186, -0.0017893448344869856, 0.0032663818631677058),
					0.005, -0.0013819789486892095, 0.0028587191579032157),
			}},
		},
	}
}

// holmReadout is guardrailReadout's first metric under Holm's adjustment,
// which gives no simultaneous interval: the chart draws the difference
// intervals.
func holmReadout() experiment.Readout {
	r := guardrailReadout()
	r.Metrics = r.Metrics[:1]
	for i := range r.Metrics[0].Comparisons {
		r.Metrics[0].Comparisons[i].Adjusted = nil
	}
	return r
}

// emptyReadout has counts of zero: nothing is defined but a guardrail's
// absolute margin of one point, lower is better.
func emptyReadout() experiment.Readout {
	return experiment.Readout{
		Experiment: "pricing-page-copy",
		Control:    "control",
		Metrics: []experiment.MetricReadout{
			{Name: "trial_started", Comparisons: []experiment.Comparison{{Treatment: "annual-first", Control: "control"}}},
			{Name: "refund_requested", LowerIsBetter: true, Guardrail: &experiment.Guardrail{Margin: 0.01},
				Comparisons: []experiment.Comparison{{Treatment: "annual-first", Control: "control",
					NonInferiority: &experiment.NonInferiorityTest{AbsoluteMargin: 0.01}}}},
		},
	}
}
