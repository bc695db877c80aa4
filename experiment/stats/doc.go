// Package stats computes the statistics of a conversion readout from
// sufficient statistics: per-arm conversion counts and unit counts.
//
// It holds the published methods the readout relies on, each documented with
// its formula, hypotheses, validity conditions, special cases and
// references:
//
//   - normal tails, quantiles and critical values ([NormalUpperTail],
//     [NormalQuantile], [CriticalValue], [ZPValue]);
//   - intervals for one rate ([Wilson], [ClopperPearson], [AgrestiCoull],
//     [WaldInterval]), for a difference of rates ([NewcombeDifference],
//     [WaldDifference]), for a ratio of rates ([KatzRatio]) and for an odds
//     ratio ([WoolfOddsRatio]);
//   - z tests ([TwoProportionZTest], [OneProportionZTest],
//     [NonInferiorityZTest]) decided by both routes, the statistic against
//     the critical value and the p-value against alpha;
//   - exact tests for small counts ([FisherExact], [BinomialExact]) and the
//     rule of thumb that chooses between them ([TwoSampleCondition],
//     [OneSampleCondition]);
//   - the sample ratio check ([ChiSquareGoodnessOfFit]);
//   - adjusted p-values for many comparisons ([AdjustPValues]);
//   - sample-size and power planning ([SampleSizePerArm] and its relatives).
//
// Arm 1 is the treatment and arm 2 the control throughout: a difference is
// p1 - p2, a ratio p1 / p2, and the alternative [Greater] means the treatment
// rate is higher.
//
// Counts that come from input are checked: a unit count n <= 0, a negative
// conversion count or more conversions than units is returned as an error
// wrapping [ErrBadCount], never a panic. No function returns NaN or an
// infinity for valid counts; where a quantity does not exist for the counts
// (a ratio over a zero control rate) the function returns [ErrUndefined],
// and where a test statistic does not exist the test says so in a warning
// and does not reject. The package keeps no state: settings travel in
// [Options], which [DefaultOptions] returns fresh.
//
// The package imports nothing from the rest of armtally.
package stats
