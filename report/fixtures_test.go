package report

import (
	"time"

	"github.com/armtally/armtally/experiment"
)

// Hand-made readouts for the golden and schema tests. The counts are
// invented; every derived number (rates, intervals, statistics, p-values,
// shares, adjusted p-values, non-inferiority tests) comes from
// testdata/fixtures.R (R 4.x, base stats: Wilson score by formula,
// Newcombe 1998 method 10, Katz log ratio, pooled z, fisher.test,
// binom.test, chisq.test, p.adjust, the Farrington-Manning score z from its
// closed-form restricted MLE), printed with 17 significant digits. The
// comment beside each block or value names the call of fixtures.R that
// printed it. The method names are the ones these readouts are expected to
// carry; the experiment package sets them in the real pipeline.

const (
	wilson    = "Wilson score"
	newcombe  = "Newcombe hybrid score"
	katz      = "Katz log ratio"
	pooledZ   = "pooled two-proportion z test"
	oneZ      = "one-proportion z test"
	fisher    = "Fisher's exact test"
	binomial  = "exact binomial test"
	pearson   = "Pearson chi-square goodness of fit"
	niZ       = "non-inferiority z test (Farrington-Manning score)"
	critical2 = 1.9599639845400536 // R: qnorm(0.975)
	critical1 = 1.6448536269514715 // R: qnorm(1 - 0.05)

	// familyText is the family every fixture adjusts.
	familyText = "every treatment against the control on every metric that is not a guardrail"
)

func ptr[T any](v T) *T { return &v }

// fewConversions is the warning that an arm has n conversions, fewer than
// the 5 the normal approximation needs.
func fewConversions(arm string, n int64) experiment.Warning {
	return experiment.Warning{Code: experiment.WarnFewConversions, Arm: arm, Count: n, MinCount: 5}
}

func at(s string) *time.Time {
	t, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		panic(err)
	}
	return &t
}

func ci(lo, hi float64, method string) *experiment.Interval {
	return ciAt(lo, hi, 0.95, method)
}

func ciAt(lo, hi, level float64, method string) *experiment.Interval {
	return &experiment.Interval{Lower: lo, Upper: hi, Level: level, Method: method}
}

// adjusted is a comparison's adjustment at alpha 0.05, decided from its
// adjusted p-value as the analysis would.
func adjusted(method string, m int, p float64) *experiment.Adjusted {
	return &experiment.Adjusted{Method: method, FamilySize: m, PValue: p, Significant: p <= 0.05}
}

// nonInferiority is a guardrail test at alpha 0.05: the one-sided z test
// (alternative greater when higher is better, less when lower is better)
// decides, and the interval is Newcombe's at 1 - 2 alpha = 90%.
func nonInferiority(margin, z, p float64, alternative string, lo, hi float64) *experiment.NonInferiorityTest {
	t := zTest(niZ, z, critical1, p, alternative)
	return &experiment.NonInferiorityTest{
		AbsoluteMargin: margin, Z: t, NonInferior: t.RejectByPValue,
		Interval: ciAt(lo, hi, 0.9, newcombe),
	}
}

// holmFamily is the Multiplicity of a Holm-adjusted family of m.
func holmFamily(m int) experiment.Multiplicity {
	return experiment.Multiplicity{Method: "holm", ErrorRate: "family-wise error rate", Family: familyText, Size: m}
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
		IntervalMethod: wilson, DifferenceIntervalMethod: newcombe, LiftIntervalMethod: katz,
		Adjustment: "holm", NonInferiorityMethod: "Farrington-Manning score",
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
		Multiplicity: holmFamily(2),
		// Six segment comparisons (tablet has no green-button units, so
		// no test there); 0.05 x 6 = 0.3 expected by chance.
		Segmentation: experiment.Segmentation{
			Dimensions: []string{"device"},
			Tests:      6,
		},
		Metrics: []experiment.MetricReadout{
			{
				Name:          "purchase",
				Events:        []string{"purchase"},
				WindowSeconds: ptr(int64(7 * 86400)),
				Segments:      purchaseByDevice(),
				Arms: []experiment.ArmRate{
					{Arm: "control", Units: 9900, Conversions: 1089, Immature: 212, Rate: ptr(0.11),
						Interval: ci(0.10398718941055886, 0.11631535358678209, wilson)},
					{Arm: "green-button", Units: 9800, Conversions: 1196, Immature: 188, Rate: ptr(0.12204081632653062),
						Interval: ci(0.11570774785712762, 0.12867007780274287, wilson)},
				},
				// fixtures.R: compare("purchase", 1196, 9800, 1089, 9900)
				Comparisons: []experiment.Comparison{{
					Treatment: "green-button", Control: "control",
					Difference:            ptr(0.012040816326530618),
					DifferenceInterval:    ci(0.0030970225473657669, 0.020990732466053229, newcombe),
					RelativeLift:          ptr(0.10946196660482377),
					LiftInterval:          ci(0.027036939286475548, 0.19850202875643763, katz),
					Z:                     zTest(pooledZ, 2.6388508135648991, critical2, 0.008318758012105033, "two-sided"),
					ConditionMet:          true,
					SignificantUnadjusted: true,
					Significant:           true,
					DecidedBy:             "z_test",
					// R: p.adjust(c(0.008318758012105033, 0.43855779546022788), "holm")[1]
					Adjusted:       adjusted("holm", 2, 0.016637516024210066),
					IntervalAgrees: true,
				}},
			},
			{
				Name:     "signup",
				Events:   []string{"account_created", "newsletter_signup"},
				Segments: signupByDevice(),
				Arms: []experiment.ArmRate{
					{Arm: "control", Units: 10112, Conversions: 2031, Rate: ptr(0.20085047468354431),
						Interval: ci(0.19315600918097584, 0.20877214235953775, wilson)},
					{Arm: "green-button", Units: 9988, Conversions: 2050, Rate: ptr(0.20524629555466559),
						Interval: ci(0.19743964293610897, 0.21327958992340215, wilson)},
				},
				// fixtures.R: compare("signup", 2050, 9988, 2031, 10112)
				Comparisons: []experiment.Comparison{{
					Treatment: "green-button", Control: "control",
					Difference:         ptr(0.0043958208711212809),
					DifferenceInterval: ci(-0.0067260784215218763, 0.015519606997480907, newcombe),
					RelativeLift:       ptr(0.021886036754691585),
					LiftInterval:       ci(-0.032586776355572278, 0.079426088657668537, katz),
					Z:                  zTest(pooledZ, 0.77463089580128708, critical2, 0.43855779546022788, "two-sided"),
					ConditionMet:       true,
					DecidedBy:          "z_test",
					// R: p.adjust(c(0.008318758012105033, 0.43855779546022788), "holm")[2]
					Adjusted:       adjusted("holm", 2, 0.43855779546022788),
					IntervalAgrees: true,
				}},
			},
		},
		Diagnostics: experiment.Diagnostics{
			Input:    "event_log",
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

// segmentCmp is a segment comparison of green-button against control at
// alpha 0.05: outside the family, so its reported decision is the
// unadjusted one.
func segmentCmp(c experiment.Comparison) experiment.Comparison {
	c.Treatment, c.Control = "green-button", "control"
	c.Significant = c.SignificantUnadjusted
	c.IntervalAgrees = true
	return c
}

// device splits the two-arm readout's units (the sums match its arms):
// desktop, mobile, tablet (control only) and units without a device
// (null). Every number: fixtures.R, "== two_arm segments".
func device(value *string, arms []experiment.ArmRate, cmp ...experiment.Comparison) experiment.SegmentResult {
	return experiment.SegmentResult{Dimension: "device", Value: value, Exploratory: true, Arms: arms, Comparisons: cmp}
}

func purchaseByDevice() []experiment.SegmentResult {
	return []experiment.SegmentResult{
		device(ptr("desktop"), []experiment.ArmRate{
			// fixtures.R: arm("control purchase desktop", 618, 5590)
			{Arm: "control", Units: 5590, Conversions: 618, Immature: 120, Rate: ptr(0.11055456171735241),
				Interval: ci(0.10260013025434443, 0.11904388092256159, wilson)},
			// fixtures.R: arm("green purchase desktop", 700, 5500)
			{Arm: "green-button", Units: 5500, Conversions: 700, Immature: 100, Rate: ptr(0.12727272727272726),
				Interval: ci(0.11872418104723048, 0.13634157063259617, wilson)},
		}, segmentCmp(experiment.Comparison{
			// fixtures.R: compare("purchase desktop", 700, 5500, 618, 5590)
			Difference:         ptr(0.01671816555537485),
			DifferenceInterval: ci(0.0046705025812794759, 0.028781204135497587, newcombe),
			RelativeLift:       ptr(0.15122094733745217),
			LiftInterval:       ci(0.040025272501640119, 0.27430525452587085, katz),
			Z:                  zTest(pooledZ, 2.7201459642753676, critical2, 0.0065253105321404796, "two-sided"),
			ConditionMet:       true, SignificantUnadjusted: true, DecidedBy: "z_test",
		})),
		device(ptr("mobile"), []experiment.ArmRate{
			// fixtures.R: arm("control purchase mobile", 466, 4288)
			{Arm: "control", Units: 4288, Conversions: 466, Immature: 92, Rate: ptr(0.10867537313432836),
				Interval: ci(0.099707758580137223, 0.11834350631394003, wilson)},
			// fixtures.R: arm("green purchase mobile", 494, 4292)
			{Arm: "green-button", Units: 4292, Conversions: 494, Immature: 88, Rate: ptr(0.11509785647716682),
				Interval: ci(0.10589239603329074, 0.12499169695020058, wilson)},
		}, segmentCmp(experiment.Comparison{
			// fixtures.R: compare("purchase mobile", 494, 4292, 466, 4288)
			Difference:         ptr(0.0064224833428384587),
			DifferenceInterval: ci(-0.0069271721269658117, 0.019775617435566717, newcombe),
			RelativeLift:       ptr(0.059097872476590707),
			LiftInterval:       ci(-0.059992212182115146, 0.19327554305513295, katz),
			Z:                  zTest(pooledZ, 0.94360617288329307, critical2, 0.34537093664209145, "two-sided"),
			ConditionMet:       true, DecidedBy: "z_test",
		})),
		device(ptr("tablet"), []experiment.ArmRate{
			// fixtures.R: arm("control purchase tablet", 2, 10)
			{Arm: "control", Units: 10, Conversions: 2, Rate: ptr(0.20000000000000001),
				Interval: ci(0.056682151454375274, 0.50983752846335817, wilson)},
			{Arm: "green-button"},
		}, segmentCmp(experiment.Comparison{})),
		device(nil, []experiment.ArmRate{
			// fixtures.R: arm("control purchase null", 3, 12)
			{Arm: "control", Units: 12, Conversions: 3, Rate: ptr(0.25),
				Interval: ci(0.088941668394054763, 0.53230533493356558, wilson)},
			// fixtures.R: arm("green purchase null", 2, 8)
			{Arm: "green-button", Units: 8, Conversions: 2, Rate: ptr(0.25),
				Interval: ci(0.071479212752109056, 0.59072456968983111, wilson)},
		}, segmentCmp(experiment.Comparison{
			// fixtures.R: compare("purchase null", 2, 8, 3, 12); too few
			// conversions, so Fisher's exact test decides.
			Difference:         ptr(0.0),
			DifferenceInterval: ci(-0.33401493022252671, 0.37687268217530867, newcombe),
			RelativeLift:       ptr(0.0),
			LiftInterval:       ci(-0.78764323835801064, 3.7090565530750199, katz),
			Z:                  zTest(pooledZ, 0, critical2, 1, "two-sided"),
			Exact:              exact(fisher, 1),
			DecidedBy:          "exact_test",
			Warnings:           []experiment.Warning{fewConversions("green-button", 2), fewConversions("control", 3)},
		})),
	}
}

func signupByDevice() []experiment.SegmentResult {
	return []experiment.SegmentResult{
		device(ptr("desktop"), []experiment.ArmRate{
			// fixtures.R: arm("control signup desktop", 1148, 5710)
			{Arm: "control", Units: 5710, Conversions: 1148, Rate: ptr(0.2010507880910683),
				Interval: ci(0.19085789423902574, 0.21164565357473689, wilson)},
			// fixtures.R: arm("green signup desktop", 1160, 5600)
			{Arm: "green-button", Units: 5600, Conversions: 1160, Rate: ptr(0.20714285714285716),
				Interval: ci(0.19673116970100599, 0.21795605439289931, wilson)},
		}, segmentCmp(experiment.Comparison{
			// fixtures.R: compare("signup desktop", 1160, 5600, 1148, 5710)
			Difference:         ptr(0.0060920690517888565),
			DifferenceInterval: ci(-0.0087623716984997022, 0.020952093272742403, newcombe),
			RelativeLift:       ptr(0.030301144848183359),
			LiftInterval:       ci(-0.042034668335203862, 0.10809902403327931, katz),
			Z:                  zTest(pooledZ, 0.80374962042825426, critical2, 0.42154159063242841, "two-sided"),
			ConditionMet:       true, DecidedBy: "z_test",
		})),
		device(ptr("mobile"), []experiment.ArmRate{
			// fixtures.R: arm("control signup mobile", 876, 4380)
			{Arm: "control", Units: 4380, Conversions: 876, Rate: ptr(0.20000000000000001),
				Interval: ci(0.18841917566387811, 0.21210659045108454, wilson)},
			// fixtures.R: arm("green signup mobile", 886, 4380)
			{Arm: "green-button", Units: 4380, Conversions: 886, Rate: ptr(0.20228310502283106),
				Interval: ci(0.19064994824498588, 0.2144380266514459, wilson)},
		}, segmentCmp(experiment.Comparison{
			// fixtures.R: compare("signup mobile", 886, 4380, 876, 4380)
			Difference:         ptr(0.0022831050228310501),
			DifferenceInterval: ci(-0.014506768978132044, 0.019071720573312932, newcombe),
			RelativeLift:       ptr(0.011415525114155223),
			LiftInterval:       ci(-0.06957788568608092, 0.099459426753050195, katz),
			Z:                  zTest(pooledZ, 0.26653983956374278, critical2, 0.7898234811922632, "two-sided"),
			ConditionMet:       true, DecidedBy: "z_test",
		})),
		device(ptr("tablet"), []experiment.ArmRate{
			// fixtures.R: arm("control signup tablet", 2, 10)
			{Arm: "control", Units: 10, Conversions: 2, Rate: ptr(0.20000000000000001),
				Interval: ci(0.056682151454375274, 0.50983752846335817, wilson)},
			{Arm: "green-button"},
		}, segmentCmp(experiment.Comparison{})),
		device(nil, []experiment.ArmRate{
			// fixtures.R: arm("control signup null", 5, 12)
			{Arm: "control", Units: 12, Conversions: 5, Rate: ptr(0.41666666666666669),
				Interval: ci(0.19326031365875668, 0.68048868745045032, wilson)},
			// fixtures.R: arm("green signup null", 4, 8)
			{Arm: "green-button", Units: 8, Conversions: 4, Rate: ptr(0.5),
				Interval: ci(0.21521606221387762, 0.78478393778612232, wilson)},
		}, segmentCmp(experiment.Comparison{
			// fixtures.R: compare("signup null", 4, 8, 5, 12)
			Difference:         ptr(0.083333333333333315),
			DifferenceInterval: ci(-0.30487273291423211, 0.44528953204426142, newcombe),
			RelativeLift:       ptr(0.19999999999999996),
			LiftInterval:       ci(-0.54213869891624578, 2.1450572402418175, katz),
			Z:                  zTest(pooledZ, 0.36698792170878675, critical2, 0.71362802747291321, "two-sided"),
			Exact:              exact(fisher, 1),
			DecidedBy:          "exact_test",
			Warnings: []experiment.Warning{
				fewConversions("green-button", 4),
				{Code: experiment.WarnFewNonConversions, Arm: "green-button", Count: 4, MinCount: 5},
			},
		})),
	}
}

// threeArmReadout has everything to warn about: a sample-ratio mismatch,
// multi-arm and tied units, an open-ended window, target-rate tests (by z
// and by the exact binomial test), a rare metric decided by Fisher's exact
// test with an undefined lift, and an interval that disagrees with the
// test. Holm's adjustment over its four comparisons turns three decisions
// that are significant before adjustment into not significant.
func threeArmReadout() experiment.Readout {
	s := defaultSettings()
	s.MultiArmPolicy = "first"
	s.MaturityPolicy = "include"
	third := 1.0 / 3
	zeroConversions := fewConversions("control", 0)
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
		Multiplicity: holmFamily(4),
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
				// The family's p-values, in order: the z tests of activated
				// (short-tour, long-tour), Fisher's of plan_upgrade
				// (short-tour, long-tour); fixtures.R:
				// adjust("onboarding: ...", c(...), "holm").
				Comparisons: []experiment.Comparison{
					{
						// fixtures.R: compare("short activated", 357, 1020, 315, 1050)
						Treatment: "short-tour", Control: "control",
						Difference:         ptr(0.049999999999999989),
						DifferenceInterval: ci(0.0096486365309528671, 0.090165972371294867, newcombe),
						RelativeLift:       ptr(0.16666666666666674),
						LiftInterval:       ci(0.029968209779135391, 0.3215078855715221, katz),
						Z:                  zTest(pooledZ, 2.4289114951974149, critical2, 0.01514422871058879, "two-sided"),
						ConditionMet:       true, SignificantUnadjusted: true, DecidedBy: "z_test", IntervalAgrees: true,
						// R: p.adjust(c(0.01514422871058879, 0.10010217307120019, 0.014207923712010358, 0.04413320025085514), "holm")[1]
						Adjusted: adjusted("holm", 4, 0.056831694848041431),
					},
					{
						// fixtures.R: compare("long activated", 298, 890, 315, 1050)
						Treatment: "long-tour", Control: "control",
						Difference:         ptr(0.034831460674157322),
						DifferenceInterval: ci(-0.0066554417509790062, 0.076404540238482505, newcombe),
						RelativeLift:       ptr(0.11610486891385774),
						LiftInterval:       ci(-0.020746461128649085, 0.27208126288617018, katz),
						Z:                  zTest(pooledZ, 1.6443584951290231, critical2, 0.10010217307120019, "two-sided"),
						ConditionMet:       true, DecidedBy: "z_test", IntervalAgrees: true,
						// R: p.adjust(c(...same four...), "holm")[2]
						Adjusted: adjusted("holm", 4, 0.10010217307120019),
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
							Warnings: []experiment.Warning{{Code: experiment.WarnFewExpectedConversions, Expected: 1050 * 0.002, MinCount: 5}}}},
					{Arm: "short-tour", Units: 1020, Conversions: 6, Rate: ptr(0.0058823529411764705),
						Interval: ci(0.0026986409938450371, 0.012773929182147849, wilson),
						TargetTest: &experiment.TargetTest{Target: 0.002, Z: zTest(oneZ, 2.7753312867172224, critical2, 0.0055145502820098521, "two-sided"),
							Exact: exact(binomial, 0.017937569731452073), Significant: true, DecidedBy: "exact_test",
							Warnings: []experiment.Warning{{Code: experiment.WarnFewExpectedConversions, Expected: 1020 * 0.002, MinCount: 5}}}},
					{Arm: "long-tour", Units: 890, Conversions: 4, Rate: ptr(0.0044943820224719105),
						Interval: ci(0.0017491237598550877, 0.011498705263781123, wilson),
						TargetTest: &experiment.TargetTest{Target: 0.002, Z: zTest(oneZ, 1.6656268100281018, critical2, 0.095787767812913455, "two-sided"),
							Exact: exact(binomial, 0.10532280307381363), DecidedBy: "exact_test",
							Warnings: []experiment.Warning{{Code: experiment.WarnFewExpectedConversions, Expected: 890 * 0.002, MinCount: 5}}}},
				},
				Comparisons: []experiment.Comparison{
					{
						// fixtures.R: compare("short upgrade", 6, 1020, 0, 1050)
						Treatment: "short-tour", Control: "control",
						Difference:            ptr(0.0058823529411764705),
						DifferenceInterval:    ci(0.0010425722971573294, 0.012773929182147849, newcombe),
						Z:                     zTest(pooledZ, 2.4888602702033, critical2, 0.012815332174534667, "two-sided"),
						Exact:                 exact(fisher, 0.014207923712010358),
						SignificantUnadjusted: true, DecidedBy: "exact_test", IntervalAgrees: true,
						// R: p.adjust(c(...same four...), "holm")[3]
						Adjusted: adjusted("holm", 4, 0.056831694848041431),
						Warnings: []experiment.Warning{zeroConversions},
					},
					{
						// fixtures.R: compare("long upgrade", 4, 890, 0, 1050).
						// Fisher's p = 0.044 is significant before adjustment
						// while the Newcombe interval reaches -0.0069 points:
						// they disagree.
						Treatment: "long-tour", Control: "control",
						Difference:            ptr(0.0044943820224719105),
						DifferenceInterval:    ci(-6.8938900617693429e-05, 0.011498705263781123, newcombe),
						Z:                     zTest(pooledZ, 2.1745922221254621, critical2, 0.029660687702079871, "two-sided"),
						Exact:                 exact(fisher, 0.04413320025085514),
						SignificantUnadjusted: true, DecidedBy: "exact_test",
						// R: p.adjust(c(...same four...), "holm")[4]
						Adjusted: adjusted("holm", 4, 0.088266400501710279),
						Warnings: []experiment.Warning{zeroConversions, fewConversions("long-tour", 4)},
					},
				},
			},
		},
		Diagnostics: experiment.Diagnostics{
			Input:         "event_log",
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
		Warnings: []experiment.Warning{{Code: experiment.WarnOpenWindowEventLog}},
	}
}

// emptyReadout is an experiment with no data yet: every rate, interval
// and test is undefined, every slice nil, the sample ratio unchecked. Its
// alternative is one-sided, so its intervals would be at 1 - 2 alpha; it
// asks for no adjustment, and its guardrail could not be tested.
func emptyReadout() experiment.Readout {
	s := defaultSettings()
	s.Alternative = "greater"
	s.ConfidenceLevel = 0.9
	s.Adjustment = "none"
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
		Multiplicity: experiment.Multiplicity{
			Method: "none", ErrorRate: "per comparison", Family: familyText,
		},
		Diagnostics: experiment.Diagnostics{Input: "counts"},
		Metrics: []experiment.MetricReadout{
			{
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
			},
			{
				Name:          "refund_requested",
				Events:        []string{"refund_requested"},
				WindowSeconds: ptr(int64(30 * 86400)),
				LowerIsBetter: true,
				Guardrail:     &experiment.Guardrail{Margin: 0.01},
				Arms: []experiment.ArmRate{
					{Arm: "control"},
					{Arm: "annual-first"},
				},
				Comparisons: []experiment.Comparison{{
					Treatment: "annual-first", Control: "control", IntervalAgrees: true,
					NonInferiority: &experiment.NonInferiorityTest{AbsoluteMargin: 0.01},
				}},
			},
		},
	}
}

// guardrailReadout is a three-arm experiment with a primary metric under
// Bonferroni's adjustment (with simultaneous intervals; one decision
// changes) and two guardrails: repeat_visit, higher is better, with a
// relative margin of 3% that both treatments pass; unsubscribe, lower is
// better, with an absolute margin of half a point that email-reminder
// fails and push-reminder passes.
func guardrailReadout() experiment.Readout {
	s := defaultSettings()
	s.Adjustment = "bonferroni"
	third := 1.0 / 3
	return experiment.Readout{
		Experiment:    "reorder-reminder",
		ExposureEvent: "reminder_eligible",
		Control:       "control",
		WindowStart:   at("2026-04-06T00:00:00Z"),
		WindowEnd:     at("2026-05-18T00:00:00Z"),
		Freshness:     at("2026-05-18T02:10:00Z"),
		Settings:      s,
		// fixtures.R: srm("reorder", c(24010, 23870, 24120), c(1, 1, 1) / 3)
		Arms: []experiment.ArmUnits{
			{Name: "control", Units: 24010, PlannedShare: third, ObservedShare: 0.33347222222222223},
			{Name: "email-reminder", Units: 23870, PlannedShare: third, ObservedShare: 0.33152777777777775},
			{Name: "push-reminder", Units: 24120, PlannedShare: third, ObservedShare: 0.33500000000000002},
		},
		SampleRatio: experiment.SampleRatio{
			Method: pearson, Statistic: 1.3083333333333333, DF: 2, PValue: 0.51987511138447562,
			Threshold: 0.001, Checked: true,
		},
		Multiplicity: experiment.Multiplicity{
			Method: "bonferroni", ErrorRate: "family-wise error rate", Family: familyText, Size: 2,
		},
		Metrics: []experiment.MetricReadout{
			{
				Name:          "reorder",
				Events:        []string{"reorder_placed"},
				WindowSeconds: ptr(int64(14 * 86400)),
				Arms: []experiment.ArmRate{
					// fixtures.R: arm("control reorder", 2281, 24010)
					{Arm: "control", Units: 24010, Conversions: 2281, Rate: ptr(0.09500208246563932),
						Interval: ci(0.091357723769916743, 0.098776015001127843, wilson)},
					// fixtures.R: arm("email reorder", 2530, 23870)
					{Arm: "email-reminder", Units: 23870, Conversions: 2530, Rate: ptr(0.10599078341013825),
						Interval: ci(0.10214892865303862, 0.10995943553942572, wilson)},
					// fixtures.R: arm("push reorder", 2430, 24120)
					{Arm: "push-reminder", Units: 24120, Conversions: 2430, Rate: ptr(0.10074626865671642),
						Interval: ci(0.097011090334838457, 0.1046086005888999, wilson)},
				},
				Comparisons: []experiment.Comparison{
					{
						// fixtures.R: compare("email reorder", 2530, 23870, 2281, 24010)
						Treatment: "email-reminder", Control: "control",
						Difference:         ptr(0.010988700944498928),
						DifferenceInterval: ci(0.0056033119374663022, 0.016376794301743838, newcombe),
						RelativeLift:       ptr(0.11566800073538763),
						LiftInterval:       ci(0.057357926776394175, 0.17719369793699413, katz),
						Z:                  zTest(pooledZ, 3.9989469438171961, critical2, 6.3624939573715352e-05, "two-sided"),
						ConditionMet:       true, SignificantUnadjusted: true, Significant: true, DecidedBy: "z_test",
						Adjusted: &experiment.Adjusted{
							Method: "bonferroni", FamilySize: 2,
							// R: p.adjust(c(6.3624939573715352e-05, 0.033969481943174729), "bonferroni")[1]
							PValue: 0.0001272498791474307, Significant: true,
							// fixtures.R: simultaneous("email reorder", 2530, 23870, 2281, 24010, 2),
							// that is newcombe(..., 1 - 0.05 / 2)
							DifferenceInterval: ciAt(0.0048298401559486275, 0.017151097364467866, 0.975, newcombe),
						},
						IntervalAgrees: true,
					},
					{
						// fixtures.R: compare("push reorder", 2430, 24120, 2281, 24010)
						Treatment: "push-reminder", Control: "control",
						Difference:         ptr(0.0057441861910770969),
						DifferenceInterval: ci(0.00043437226979455533, 0.011054455323376601, newcombe),
						RelativeLift:       ptr(0.060463792392705384),
						LiftInterval:       ci(0.0044418816154987439, 0.1196102786626041, katz),
						Z:                  zTest(pooledZ, 2.1204337626811758, critical2, 0.033969481943174729, "two-sided"),
						ConditionMet:       true, SignificantUnadjusted: true, DecidedBy: "z_test",
						Adjusted: &experiment.Adjusted{
							Method: "bonferroni", FamilySize: 2,
							// R: p.adjust(c(6.3624939573715352e-05, 0.033969481943174729), "bonferroni")[2]
							PValue: 0.067938963886349457,
							// fixtures.R: simultaneous("push reorder", 2430, 24120, 2281, 24010, 2)
							DifferenceInterval: ciAt(-0.00032844401833117317, 0.01181741125638253, 0.975, newcombe),
						},
						IntervalAgrees: true,
					},
				},
			},
			{
				Name:          "repeat_visit",
				Events:        []string{"session_started"},
				WindowSeconds: ptr(int64(7 * 86400)),
				Guardrail:     &experiment.Guardrail{Margin: 0.03, Relative: true},
				Arms: []experiment.ArmRate{
					// fixtures.R: arm("control repeat_visit", 9604, 24010)
					{Arm: "control", Units: 24010, Conversions: 9604, Rate: ptr(0.40000000000000002),
						Interval: ci(0.39381981237111113, 0.40621218133407994, wilson)},
					// fixtures.R: arm("email repeat_visit", 9500, 23870)
					{Arm: "email-reminder", Units: 23870, Conversions: 9500, Rate: ptr(0.39798910766652701),
						Interval: ci(0.39179645664674939, 0.40421458713939101, wilson)},
					// fixtures.R: arm("push repeat_visit", 9700, 24120)
					{Arm: "push-reminder", Units: 24120, Conversions: 9700, Rate: ptr(0.4021558872305141),
						Interval: ci(0.39598393625316419, 0.40835899942492748, wilson)},
				},
				Comparisons: []experiment.Comparison{
					{
						// fixtures.R: compare("email repeat_visit", 9500, 23870, 9604, 24010)
						Treatment: "email-reminder", Control: "control",
						Difference:         ptr(-0.0020108923334730133),
						DifferenceInterval: ci(-0.010782444281688544, 0.0067612974612887445, newcombe),
						RelativeLift:       ptr(-0.0050272308336825056),
						LiftInterval:       ci(-0.026664831521206245, 0.017091381717662557, katz),
						Z:                  zTest(pooledZ, -0.44927350906776575, critical2, 0.65323436530417622, "two-sided"),
						ConditionMet:       true, DecidedBy: "z_test", IntervalAgrees: true,
						// fixtures.R: noninf("email repeat_visit", 9500, 23870, 9604, 24010, 0.03, relative = TRUE):
						// margin 0.03 * 9604 / 24010, z, pnorm(z, lower.tail = FALSE), newcombe(..., 0.9)
						NonInferiority: nonInferiority(0.012, 2.2319429506230826, 0.012809366848169112, "greater",
							-0.0093724135678010141, 0.0053510781645547756),
					},
					{
						// fixtures.R: compare("push repeat_visit", 9700, 24120, 9604, 24010)
						Treatment: "push-reminder", Control: "control",
						Difference:         ptr(0.0021558872305140753),
						DifferenceInterval: ci(-0.0066010629117615651, 0.010912217513500853, newcombe),
						RelativeLift:       ptr(0.0053897180762851882),
						LiftInterval:       ci(-0.016324721492064431, 0.027583499655224664, katz),
						Z:                  zTest(pooledZ, 0.48250615439730227, critical2, 0.62944642750259705, "two-sided"),
						ConditionMet:       true, DecidedBy: "z_test", IntervalAgrees: true,
						// fixtures.R: noninf("push repeat_visit", 9700, 24120, 9604, 24010, 0.03, relative = TRUE)
						NonInferiority: nonInferiority(0.012, 3.1683656858916818, 0.00076649282224750025, "greater",
							-0.005193294480465448, 0.0095046323485920847),
					},
				},
			},
			{
				Name:          "unsubscribe",
				Events:        []string{"unsubscribed"},
				WindowSeconds: ptr(int64(14 * 86400)),
				LowerIsBetter: true,
				Guardrail:     &experiment.Guardrail{Margin: 0.005},
				Arms: []experiment.ArmRate{
					// fixtures.R: arm("control unsubscribe", 480, 24010)
					{Arm: "control", Units: 24010, Conversions: 480, Rate: ptr(0.019991670137442734),
						Interval: ci(0.018296451845839785, 0.021840460878994529, wilson)},
					// fixtures.R: arm("email unsubscribe", 650, 23870)
					{Arm: "email-reminder", Units: 23870, Conversions: 650, Rate: ptr(0.027230833682446585),
						Interval: ci(0.025240969074567368, 0.029372841655040303, wilson)},
					// fixtures.R: arm("push unsubscribe", 500, 24120)
					{Arm: "push-reminder", Units: 24120, Conversions: 500, Rate: ptr(0.020729684908789386),
						Interval: ci(0.019006455565042036, 0.022605551400525521, wilson)},
				},
				Comparisons: []experiment.Comparison{
					{
						// fixtures.R: compare("email unsubscribe", 650, 23870, 480, 24010)
						Treatment: "email-reminder", Control: "control",
						Difference:         ptr(0.0072391635450038509),
						DifferenceInterval: ci(0.0045229919076182554, 0.0099708229693904766, newcombe),
						RelativeLift:       ptr(0.36210899315737999),
						LiftInterval:       ci(0.21221502415457238, 0.53053779426151748, katz),
						Z:                  zTest(pooledZ, 5.2174430732756365, critical2, 1.8140995163780063e-07, "two-sided"),
						ConditionMet:       true, SignificantUnadjusted: true, Significant: true, DecidedBy: "z_test", IntervalAgrees: true,
						// fixtures.R: noninf("email unsubscribe", 650, 23870, 480, 24010, 0.005, lower_is_better = TRUE):
						// z = (d - 0.005) / se, pnorm(z), newcombe(..., 0.9)
						NonInferiority: nonInferiority(0.005, 1.61744318602315, 0.94710867496793449, "less",
							0.004959647578032942, 0.0095295964395909587),
					},
					{
						// fixtures.R: compare("push unsubscribe", 500, 24120, 480, 24010)
						Treatment: "push-reminder", Control: "control",
						Difference:         ptr(0.00073801477134665186),
						DifferenceInterval: ci(-0.0017893448344869856, 0.0032663818631677058, newcombe),
						RelativeLift:       ptr(0.036916113875068879),
						LiftInterval:       ci(-0.083974846427238181, 0.17376146606914089, katz),
						Z:                  zTest(pooledZ, 0.57319689679104635, critical2, 0.56651138528784051, "two-sided"),
						ConditionMet:       true, DecidedBy: "z_test", IntervalAgrees: true,
						// fixtures.R: noninf("push unsubscribe", 500, 24120, 480, 24010, 0.005, lower_is_better = TRUE)
						NonInferiority: nonInferiority(0.005, -3.2916092531034025, 0.00049807957578686265, "less",
							-0.0013819789486892095, 0.0028587191579032157),
					},
				},
			},
		},
		Diagnostics: experiment.Diagnostics{
			Input:        "event_log",
			RowsRead:     2904117,
			ExposureRows: 96330,
			UnitsExposed: 72000,
			UnitsPerArm: []experiment.ArmCount{
				{Arm: "control", Units: 24010},
				{Arm: "email-reminder", Units: 23870},
				{Arm: "push-reminder", Units: 24120},
			},
			Immature: []experiment.MetricCount{
				{Metric: "reorder", Units: 0},
				{Metric: "repeat_visit", Units: 0},
				{Metric: "unsubscribe", Units: 0},
			},
			IgnoredEvents: []experiment.ReasonCount{
				{Reason: "before_exposure", Count: 5120},
				{Reason: "unit_never_exposed", Count: 310554},
				{Reason: "outside_attribution_window", Count: 20871},
			},
		},
	}
}

// oneSidedReadout tests for an increase only (alternative greater), so its
// intervals are two-sided at 1 - 2 alpha = 90%, and adjusts its two
// comparisons by Benjamini-Hochberg (false discovery rate).
func oneSidedReadout() experiment.Readout {
	s := defaultSettings()
	s.Alternative = "greater"
	s.ConfidenceLevel = 0.9
	s.Adjustment = "bh"
	return experiment.Readout{
		Experiment:    "free-shipping-banner",
		ExposureEvent: "banner_slot_viewed",
		Control:       "control",
		WindowStart:   at("2026-06-01T00:00:00Z"),
		WindowEnd:     at("2026-06-22T00:00:00Z"),
		Freshness:     at("2026-06-22T05:00:00Z"),
		Settings:      s,
		// fixtures.R: srm("banner", c(8020, 7980), c(0.5, 0.5))
		Arms: []experiment.ArmUnits{
			{Name: "control", Units: 8020, PlannedShare: 0.5, ObservedShare: 0.50124999999999997},
			{Name: "banner", Units: 7980, PlannedShare: 0.5, ObservedShare: 0.49875000000000003},
		},
		SampleRatio: experiment.SampleRatio{
			Method: pearson, Statistic: 0.10000000000000001, DF: 1, PValue: 0.75182963404584935,
			Threshold: 0.001, Checked: true,
		},
		Multiplicity: experiment.Multiplicity{
			Method: "bh", ErrorRate: "false discovery rate", Family: familyText, Size: 2,
		},
		Metrics: []experiment.MetricReadout{
			{
				Name:          "purchase",
				Events:        []string{"purchase"},
				WindowSeconds: ptr(int64(7 * 86400)),
				Arms: []experiment.ArmRate{
					// fixtures.R: arm("control purchase", 642, 8020, level = 0.9)
					{Arm: "control", Units: 8020, Conversions: 642, Rate: ptr(0.080049875311720697),
						Interval: ciAt(0.07520604480174195, 0.085176950247097538, 0.9, wilson)},
					// fixtures.R: arm("banner purchase", 720, 7980, level = 0.9)
					{Arm: "banner", Units: 7980, Conversions: 720, Rate: ptr(0.090225563909774431),
						Interval: ciAt(0.085088087584020866, 0.095640806348078311, 0.9, wilson)},
				},
				Comparisons: []experiment.Comparison{{
					// fixtures.R: compare("banner purchase", 720, 7980, 642, 8020, alternative = "greater", level = 0.9)
					Treatment: "banner", Control: "control",
					Difference:         ptr(0.010175688598053734),
					DifferenceInterval: ciAt(0.0029175510690007201, 0.017441192343494123, 0.9, newcombe),
					RelativeLift:       ptr(0.12711685756447189),
					LiftInterval:       ciAt(0.034842166910975747, 0.22761948751871652, 0.9, katz),
					Z:                  zTest(pooledZ, 2.3061258499757851, critical1, 0.010551800642756418, "greater"),
					ConditionMet:       true, SignificantUnadjusted: true, Significant: true, DecidedBy: "z_test",
					// R: p.adjust(c(0.010551800642756418, 0.14580401940310744), "BH")[1]
					Adjusted:       adjusted("bh", 2, 0.021103601285512835),
					IntervalAgrees: true,
				}},
			},
			{
				Name:          "signup",
				Events:        []string{"newsletter_signup"},
				WindowSeconds: ptr(int64(3 * 86400)),
				Arms: []experiment.ArmRate{
					// fixtures.R: arm("control signup", 240, 8020, level = 0.9)
					{Arm: "control", Units: 8020, Conversions: 240, Rate: ptr(0.029925187032418952),
						Interval: ciAt(0.026950827142757171, 0.033216599025332173, 0.9, wilson)},
					// fixtures.R: arm("banner signup", 262, 7980, level = 0.9)
					{Arm: "banner", Units: 7980, Conversions: 262, Rate: ptr(0.032832080200501254),
						Interval: ciAt(0.029706003721464518, 0.036274827036598407, 0.9, wilson)},
				},
				Comparisons: []experiment.Comparison{{
					// fixtures.R: compare("banner signup", 262, 7980, 240, 8020, alternative = "greater", level = 0.9)
					Treatment: "banner", Control: "control",
					Difference:         ptr(0.0029068931680823022),
					DifferenceInterval: ciAt(-0.001632462189221166, 0.0074565439822312082, 0.9, newcombe),
					RelativeLift:       ptr(0.097138680033416858),
					LiftInterval:       ciAt(-0.050617001941094752, 0.26789007775214335, 0.9, katz),
					Z:                  zTest(pooledZ, 1.054600579159841, critical1, 0.14580401940310744, "greater"),
					ConditionMet:       true, DecidedBy: "z_test",
					// R: p.adjust(c(0.010551800642756418, 0.14580401940310744), "BH")[2]
					Adjusted:       adjusted("bh", 2, 0.14580401940310744),
					IntervalAgrees: true,
				}},
			},
		},
		Diagnostics: experiment.Diagnostics{
			Input:        "event_log",
			RowsRead:     402288,
			ExposureRows: 18877,
			UnitsExposed: 16000,
			UnitsPerArm: []experiment.ArmCount{
				{Arm: "control", Units: 8020},
				{Arm: "banner", Units: 7980},
			},
			Immature: []experiment.MetricCount{
				{Metric: "purchase", Units: 0},
				{Metric: "signup", Units: 0},
			},
			IgnoredEvents: []experiment.ReasonCount{
				{Reason: "before_exposure", Count: 744},
				{Reason: "unit_never_exposed", Count: 51230},
			},
		},
	}
}
