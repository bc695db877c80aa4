// Package sequential holds the statistics of an experiment watched look by
// look: group-sequential boundaries from alpha-spending functions
// ([Boundaries], [OBrienFlemingSpending], [PocockSpending], [SplitAlpha],
// [CrossingProbabilities]) and the always-valid mixture sequential
// probability ratio test for a difference of two proportions ([Mixture],
// [ProportionsDifference], [TunedMixingVariance]). It imports only gonum.
//
// # How analyze uses it (experiment/monitor, cmd/armtally/monitor.go)
//
// A metric chooses its method in the spec or by flag, say
// --sequential METRIC=obf|pocock|mixture (fixed-horizon stays the
// default and is still reported beside it). --history FILE names the
// experiment/history file and --as-of INSTANT the look's key (rows after
// it ignored, the instant the analysis end; without it the key is the
// data's freshness). Each night:
//
//  1. The alpha of each comparison comes from the family as today, then
//     [SplitAlpha] over the comparisons of the confirmatory family (the
//     Bonferroni split is the one that is valid before spending).
//  2. Group-sequential: the information fraction is the units so far over
//     the planned units (plan or spec), per comparison the smaller of the
//     two arms' fractions. The earlier fractions come from the history
//     (history.Fractions, looks before the key); tonight's is appended and
//     [Boundaries] gives tonight's boundary, alpha spent and nominal
//     p-value; Boundary.Crossed on tonight's z, and FirstCrossing over the
//     stored statistics says whether an earlier night already crossed.
//     A fraction at or below the previous one (units removed by a data
//     fix) is reported as a data warning and the look is not tested.
//  3. Mixture: [ProportionsDifference] at each stored look and tonight,
//     then Mixture.Monitor; tau^2 from [TunedMixingVariance] at the
//     planned units when there is a plan, else [DefaultMixingVariance],
//     stated in the readout. Always two-sided.
//  4. The look (counts per arm and metric, each comparison's state, daily
//     exposures) is written with history.Store.Put after the readout is
//     computed and before the outputs are renamed into place, so a failed
//     run leaves neither.
//
// The readout then states the method, look number, information fraction,
// alpha spent, boundary and whether it was crossed, and keeps the caution
// that a fixed-horizon p-value read every night overstates the evidence.
package sequential
