package report

import (
	"time"

	"github.com/armtally/armtally/experiment"
)

// Hand-made readouts for the golden and schema tests. The counts are
// invented; every derived number (rates, intervals, statistics, p-values,
// shares) comes from testdata/fixtures.R (R 4.x, base stats: Wilson score
// by formula, Newcombe 1998 method 10, Katz log ratio, pooled z,
// fisher.test, binom.test, chisq.test), printed with 17 significant digits.
// The method names are the ones these readouts are expected to carry; the
// experiment package sets them in the real pipeline.

const (
	wilson    = "Wilson score"
	newcombe  = "Newcombe hybrid score"
	katz      = "Katz log ratio"
	pooledZ   = "pooled two-proportion z test"
	oneZ      = "one-proportion z test"
	fisher    = "Fisher's exact test"
	binomial  = "exact binomial test"
	pearson   = "Pearson chi-square goodness of fit"
	critical2 = 1.9599639845400536 // R: qnorm(0.975)
)

func ptr[T any](v T) *T { return &v }

func at(s string) *time.Time {
	t, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		panic(err)
	}
	return &t
}

func ci(lo, hi float64, method string) *experiment.Interval {
	return &experiment.Interval{Lower: lo, Upper: hi, Level: 0.95, Method: method}
}

// zTest builds a z test at alpha 0.05 whose two routes are decided from
// its own numbers, as the analysis would.
func zTest(method string, z, critical, p float64, alternative string) *experiment.Test {
	reject := z >= critical || -z >= critical
	switch alternative {
	case "greater":
		reject = z >= critical
	case "less":
		reject = z <= -critical
	}
	return &experiment.Test{
		Method: method, Statistic: z, CriticalValue: critical, PValue: p, Alpha: 0.05,
		Alternative: alternative, RejectByStatistic: reject, RejectByPValue: p <= 0.05,
	}
}

func exact(method string, p float64) *experiment.ExactTest {
	return &experiment.ExactTest{Method: method, PValue: p, Alpha: 0.05, Alternative: "two-sided", Reject: p <= 0.05}
}

func defaultSettings() experiment.Settings {
	return experiment.Settings{
		Alpha: 0.05, ConfidenceLevel: 0.95, Alternative: "two-sided",
		MultiArmPolicy: "exclude", MaturityPolicy: "exclude",
		MinCount: 5, SampleRatioThreshold: 0.001,
	}
}

// twoArmReadout is a clean two-arm experiment: a significant lift on
// purchase (with immature units left out) and no detectable change on
// signup.
func twoArmReadout() experiment.Readout {
	return experiment.Readout{
		Experiment:    "checkout-button-color",
		ExposureEvent: "checkout_viewed",
		Control:       "control",
		WindowStart:   at("2026-03-02T00:00:00Z"),
		WindowEnd:     at("2026-03-16T00:00:00Z"),
		// An offset and a fraction: the writers print it in UTC.
		Freshness: at("2026-03-16T07:12:45.25+01:00"),
		Settings:  defaultSettings(),
		Arms: []experiment.ArmUnits{
			{Name: "control", Units: 10112, PlannedShare: 0.5, ObservedShare: 0.50308457711442789},
			{Name: "green-button", Units: 9988, PlannedShare: 0.5, ObservedShare: 0.49691542288557217},
		},
		SampleRatio: experiment.SampleRatio{
			Method: pearson, Statistic: 0.76497512437810944, DF: 1, PValue: 0.38177604076944532,
			Threshold: 0.001, Checked: true,
		},
		Metrics: []experiment.MetricReadout{
			{
				Name:          "purchase",
				Events:        []string{"purchase"},
				WindowSeconds: ptr(int64(7 * 86400)),
				Arms: []experiment.ArmRate{
					{Arm: "control", Units: 9900, Conversions: 1089, Immature: 212, Rate: ptr(0.11),
						Interval: ci(0.10398718941055886, 0.11631535358678209, wilson)},
					{Arm: "green-button", Units: 9800, Conversions: 1196, Immature: 188, Rate: ptr(0.12204081632653062),
						Interval: ci(0.11570774785712762, 0.12867007780274287, wilson)},
				},
				Comparisons: []experiment.Comparison{{
					Treatment: "green-button", Control: "control",
					Difference:         ptr(0.012040816326530618),
					DifferenceInterval: ci(0.0030970225473657669, 0.020990732466053229, newcombe),
					RelativeLift:       ptr(0.10946196660482377),
					LiftInterval:       ci(0.027036939286475548, 0.19850202875643763, katz),
					Z:                  zTest(pooledZ, 2.6388508135648991, critical2, 0.008318758012105033, "two-sided"),
					ConditionMet:       true,
					Significant:        true,
					DecidedBy:          "z_test",
					IntervalAgrees:     true,
				}},
			},
			{
				Name:   "signup",
				Events: []string{"account_created", "newsletter_signup"},
				Arms: []experiment.ArmRate{
					{Arm: "control", Units: 10112, Conversions: 2031, Rate: ptr(0.20085047468354431),
						Interval: ci(0.19315600918097584, 0.20877214235953775, wilson)},
					{Arm: "green-button", Units: 9988, Conversions: 2050, Rate: ptr(0.20524629555466559),
						Interval: ci(0.19743964293610897, 0.21327958992340215, wilson)},
				},
				Comparisons: []experiment.Comparison{{
					Treatment: "green-button", Control: "control",
					Difference:         ptr(0.0043958208711212809),
					DifferenceInterval: ci(-0.0067260784215218763, 0.015519606997480907, newcombe),
					RelativeLift:       ptr(0.021886036754691585),
					LiftInterval:       ci(-0.032586776355572278, 0.079426088657668537, katz),
					Z:                  zTest(pooledZ, 0.77463089580128708, critical2, 0.43855779546022788, "two-sided"),
					ConditionMet:       true,
					DecidedBy:          "z_test",
					IntervalAgrees:     true,
				}},
			},
		},
		Diagnostics: experiment.Diagnostics{
			RowsRead: 1482913,
			BadRows: []experiment.ReasonCount{
				{Reason: "bad_timestamp", Count: 37},
				{Reason: "null_user", Count: 5},
			},
			ExposureRows: 41220,
			UnitsExposed: 20100,
			UnitsPerArm: []experiment.ArmCount{
				{Arm: "control", Units: 10112},
				{Arm: "green-button", Units: 9988},
			},
			Immature: []experiment.MetricCount{
				{Metric: "purchase", Units: 400},
				{Metric: "signup", Units: 0},
			},
			IgnoredEvents: []experiment.ReasonCount{
				{Reason: "before_exposure", Count: 1203},
				{Reason: "unit_never_exposed", Count: 88410},
				{Reason: "after_window_end", Count: 12977},
				{Reason: "outside_attribution_window", Count: 645},
			},
		},
	}
}

// threeArmReadout has everything to warn about: a sample-ratio mismatch,
// multi-arm and tied units, an open-ended window, target-rate tests (by z
// and by the exact binomial test), a rare metric decided by Fisher's exact
// test with an undefined lift, and an interval that disagrees with the
// test.
func threeArmReadout() experiment.Readout {
	s := defaultSettings()
	s.MultiArmPolicy = "first"
	s.MaturityPolicy = "include"
	third := 1.0 / 3
	zeroConversions := "normal approximation not justified: control has 0 conversions, needs at least 5"
	return experiment.Readout{
		Experiment:    "onboarding-tour",
		ExposureEvent: "tour_offered",
		Control:       "control",
		WindowStart:   at("2026-02-01T00:00:00Z"),
		Freshness:     at("2026-02-15T23:59:58Z"),
		Settings:      s,
		Arms: []experiment.ArmUnits{
			{Name: "control", Units: 1050, PlannedShare: third, ObservedShare: 0.35472972972972971},
			{Name: "short-tour", Units: 1020, PlannedShare: third, ObservedShare: 0.34459459459459457},
			{Name: "long-tour", Units: 890, PlannedShare: third, ObservedShare: 0.30067567567567566},
		},
		SampleRatio: experiment.SampleRatio{
			Method: pearson, Statistic: 14.662162162162165, DF: 2, PValue: 0.00065486524188170707,
			Threshold: 0.001, Mismatch: true, Checked: true,
		},
		Metrics: []experiment.MetricReadout{
			{
				Name:          "activated",
				Events:        []string{"tour_completed"},
				WindowSeconds: ptr(int64(3 * 86400)),
				Target:        ptr(0.3),
				Arms: []experiment.ArmRate{
					{Arm: "control", Units: 1050, Conversions: 315, Rate: ptr(0.29999999999999999),
						Interval: ci(0.27305192434709596, 0.3284061541099777, wilson),
						TargetTest: &experiment.TargetTest{Target: 0.3, Z: zTest(oneZ, 0, critical2, 1, "two-sided"),
							ConditionMet: true, DecidedBy: "z_test"}},
					{Arm: "short-tour", Units: 1020, Conversions: 357, Rate: ptr(0.34999999999999998),
						Interval: ci(0.32134126760494547, 0.37978433405562367, wilson),
						TargetTest: &experiment.TargetTest{Target: 0.3, Z: zTest(oneZ, 3.4846602621858471, critical2, 0.00049276227029902361, "two-sided"),
							ConditionMet: true, Significant: true, DecidedBy: "z_test"}},
					{Arm: "long-tour", Units: 890, Conversions: 298, Rate: ptr(0.33483146067415731),
						Interval: ci(0.30459483583749641, 0.36648777383704906, wilson),
						TargetTest: &experiment.TargetTest{Target: 0.3, Z: zTest(oneZ, 2.2675508929017263, critical2, 0.023356593645852863, "two-sided"),
							ConditionMet: true, Significant: true, DecidedBy: "z_test"}},
				},
				Comparisons: []experiment.Comparison{
					{
						Treatment: "short-tour", Control: "control",
						Difference:         ptr(0.049999999999999989),
						DifferenceInterval: ci(0.0096486365309528671, 0.090165972371294867, newcombe),
						RelativeLift:       ptr(0.16666666666666674),
						LiftInterval:       ci(0.029968209779135391, 0.3215078855715221, katz),
						Z:                  zTest(pooledZ, 2.4289114951974149, critical2, 0.01514422871058879, "two-sided"),
						ConditionMet:       true, Significant: true, DecidedBy: "z_test", IntervalAgrees: true,
					},
					{
						Treatment: "long-tour", Control: "control",
						Difference:         ptr(0.034831460674157322),
						DifferenceInterval: ci(-0.0066554417509790062, 0.076404540238482505, newcombe),
						RelativeLift:       ptr(0.11610486891385774),
						LiftInterval:       ci(-0.020746461128649085, 0.27208126288617018, katz),
						Z:                  zTest(pooledZ, 1.6443584951290231, critical2, 0.10010217307120019, "two-sided"),
						ConditionMet:       true, DecidedBy: "z_test", IntervalAgrees: true,
					},
				},
			},
			{
				Name:   "plan_upgrade",
				Events: []string{"plan_upgraded"},
				Target: ptr(0.002),
				Arms: []experiment.ArmRate{
					{Arm: "control", Units: 1050, Conversions: 0, Rate: ptr(0.0),
						Interval: ci(0, 0.0036451961426844266, wilson),
						TargetTest: &experiment.TargetTest{Target: 0.002, Z: zTest(oneZ, -1.4505889896292703, critical2, 0.14689434302959373, "two-sided"),
							Exact: exact(binomial, 0.28338591260688911), DecidedBy: "exact_test",
							Warnings: []string{"normal approximation not justified: n p0 = 2.1, needs at least 5"}}},
					{Arm: "short-tour", Units: 1020, Conversions: 6, Rate: ptr(0.0058823529411764705),
						Interval: ci(0.0026986409938450371, 0.012773929182147849, wilson),
						TargetTest: &experiment.TargetTest{Target: 0.002, Z: zTest(oneZ, 2.7753312867172224, critical2, 0.0055145502820098521, "two-sided"),
							Exact: exact(binomial, 0.017937569731452073), Significant: true, DecidedBy: "exact_test",
							Warnings: []string{"normal approximation not justified: n p0 = 2.04, needs at least 5"}}},
					{Arm: "long-tour", Units: 890, Conversions: 4, Rate: ptr(0.0044943820224719105),
						Interval: ci(0.0017491237598550877, 0.011498705263781123, wilson),
						TargetTest: &experiment.TargetTest{Target: 0.002, Z: zTest(oneZ, 1.6656268100281018, critical2, 0.095787767812913455, "two-sided"),
							Exact: exact(binomial, 0.10532280307381363), DecidedBy: "exact_test",
							Warnings: []string{"normal approximation not justified: n p0 = 1.78, needs at least 5"}}},
				},
				Comparisons: []experiment.Comparison{
					{
						Treatment: "short-tour", Control: "control",
						Difference:         ptr(0.0058823529411764705),
						DifferenceInterval: ci(0.0010425722971573294, 0.012773929182147849, newcombe),
						Z:                  zTest(pooledZ, 2.4888602702033, critical2, 0.012815332174534667, "two-sided"),
						Exact:              exact(fisher, 0.014207923712010358),
						Significant:        true, DecidedBy: "exact_test", IntervalAgrees: true,
						Warnings: []string{zeroConversions},
					},
					{
						// Fisher's p = 0.044 is significant while the Newcombe
						// interval reaches -0.0069 points: they disagree.
						Treatment: "long-tour", Control: "control",
						Difference:         ptr(0.0044943820224719105),
						DifferenceInterval: ci(-6.8938900617693429e-05, 0.011498705263781123, newcombe),
						Z:                  zTest(pooledZ, 2.1745922221254621, critical2, 0.029660687702079871, "two-sided"),
						Exact:              exact(fisher, 0.04413320025085514),
						Significant:        true, DecidedBy: "exact_test",
						Warnings: []string{zeroConversions, "long-tour has 4 conversions, needs at least 5"},
					},
				},
			},
		},
		Diagnostics: experiment.Diagnostics{
			RowsRead:      310442,
			ExposureRows:  6120,
			UnitsExposed:  2963,
			MultiArmUnits: 41,
			TiedUnits:     3,
			UnitsPerArm: []experiment.ArmCount{
				{Arm: "control", Units: 1050},
				{Arm: "short-tour", Units: 1020},
				{Arm: "long-tour", Units: 890},
			},
			Immature: []experiment.MetricCount{
				{Metric: "activated", Units: 57},
				{Metric: "plan_upgrade", Units: 0},
			},
			IgnoredEvents: []experiment.ReasonCount{
				{Reason: "before_exposure", Count: 312},
				{Reason: "unit_never_exposed", Count: 40118},
				{Reason: "outside_attribution_window", Count: 77},
			},
		},
		Warnings: []string{
			"the analysis window has no end: units exposed shortly before the data freshness had little time to convert",
		},
	}
}

// emptyReadout is an experiment with no data yet: every rate, interval
// and test is undefined, every slice nil, the sample ratio unchecked.
func emptyReadout() experiment.Readout {
	s := defaultSettings()
	s.Alternative = "greater"
	return experiment.Readout{
		Experiment:    "pricing-page-copy",
		ExposureEvent: "pricing_viewed",
		Control:       "control",
		Settings:      s,
		Arms: []experiment.ArmUnits{
			{Name: "control", PlannedShare: 0.5},
			{Name: "annual-first", PlannedShare: 0.5},
		},
		SampleRatio: experiment.SampleRatio{Method: pearson, PValue: 1, Threshold: 0.001},
		Metrics: []experiment.MetricReadout{{
			Name:          "trial_started",
			Events:        []string{"trial_started"},
			WindowSeconds: ptr(int64(14 * 86400)),
			Arms: []experiment.ArmRate{
				{Arm: "control"},
				{Arm: "annual-first"},
			},
			Comparisons: []experiment.Comparison{{
				Treatment: "annual-first", Control: "control", IntervalAgrees: true,
			}},
		}},
	}
}
