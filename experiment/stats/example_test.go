package stats_test

import (
	"errors"
	"fmt"

	"github.com/armtally/armtally/experiment/stats"
)

// The per-arm rate of a checkout metric: 81 of 263 units converted. The
// interval matches R 4.2.2 prop.test(81, 263, correct = FALSE)$conf.int,
// [0.2552885, 0.3662096] (experiment/REFERENCE-VALUES.md CI-01).
func ExampleWilson() {
	ci, err := stats.Wilson(81, 263, 0.95)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("%s %.0f%%: [%.4f, %.4f]\n", ci.Method, 100*ci.Level, ci.Lower, ci.Upper)
	// Output: Wilson score 95%: [0.2553, 0.3662]
}

// Treatment 1300/25000 against control 1200/25000, decided by both routes.
// R 4.2.2 prop.test(c(1300, 1200), c(25000, 25000), correct = FALSE) gives
// X-squared = 4.2105 (z = 2.0520) and p = 0.04017
// (experiment/REFERENCE-VALUES.md P2-09).
func ExampleTwoProportionZTest() {
	opt := stats.DefaultOptions()
	zt, err := stats.TwoProportionZTest(1300, 25000, 1200, 25000, opt.Alpha, opt.Alternative)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("%s (%s): z = %.4f, critical value %.4f, p = %.5f\n", zt.Method, zt.Alternative, zt.Statistic, zt.CriticalValue, zt.PValue)
	fmt.Println("reject by statistic:", zt.RejectByStatistic, "by p-value:", zt.RejectByPValue)
	// Output:
	// pooled two-proportion z test (two-sided): z = 2.0520, critical value 1.9600, p = 0.04017
	// reject by statistic: true by p-value: true
}

// No unit converted in either arm: the pooled statistic is 0/0, so the
// test reports z = 0, p = 1 and says why.
func ExampleTwoProportionZTest_undefined() {
	zt, _ := stats.TwoProportionZTest(0, 10, 0, 20, 0.05, stats.TwoSided)
	fmt.Println(zt.Statistic, zt.PValue, zt.RejectByPValue)
	fmt.Println(zt.Warnings[0])
	// Output:
	// 0 1 false
	// pooled z statistic undefined: no unit converted in either arm; reported as z = 0, p = 1
}

// The difference and the relative lift of 56/70 against 48/80, as in
// Newcombe (1998), Table II, example (a): [0.0524, 0.3339]. The Katz
// interval of p1/p2 (epitools riskratio.wald: [1.0766, 1.6512]) minus 1 is
// the lift interval.
func ExampleNewcombeDifference() {
	d, _ := stats.NewcombeDifference(56, 70, 48, 80, 0.95)
	fmt.Printf("difference: [%.4f, %.4f]\n", d.Lower, d.Upper)
	r, _ := stats.KatzRatio(56, 70, 48, 80, 0.95)
	fmt.Printf("lift: [%.2f%%, %.2f%%]\n", 100*(r.Lower-1), 100*(r.Upper-1))
	_, err := stats.KatzRatio(5, 56, 0, 29, 0.95)
	fmt.Println("zero control:", errors.Is(err, stats.ErrUndefined))
	// Output:
	// difference: [0.0524, 0.3339]
	// lift: [7.66%, 65.12%]
	// zero control: true
}

// When an arm has too few conversions, the rule of thumb says so and the
// readout relies on Fisher's exact test. R 4.2.2 fisher.test(matrix(c(9, 3,
// 1, 7), 2))$p.value = 0.01977 (experiment/REFERENCE-VALUES.md FE-02).
func ExampleFisherExact() {
	ok, warnings := stats.TwoSampleCondition(9, 10, 3, 10, 5)
	fmt.Println(ok)
	for _, w := range warnings {
		fmt.Println(w)
	}
	et, _ := stats.FisherExact(9, 10, 3, 10, 0.05, stats.TwoSided)
	fmt.Printf("%s: p = %.5f, reject: %v\n", et.Method, et.PValue, et.Reject)
	// Output:
	// false
	// normal approximation not justified: treatment has 1 non-conversion, needs at least 5
	// normal approximation not justified: control has 3 conversions, needs at least 5
	// Fisher's exact test: p = 0.01977, reject: true
}

// Units per arm to detect 10% against 12% with 80% power at alpha 0.05,
// two-sided: R 4.2.2 power.prop.test gives n = 3840.85, so 3841
// (experiment/REFERENCE-VALUES.md SS-01).
func ExampleSampleSizePerArm() {
	n, _ := stats.SampleSizePerArm(0.10, 0.12, 0.05, 0.8, stats.TwoSided)
	fmt.Println(n)
	// Output: 3841
}
