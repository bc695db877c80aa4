// Package experiment turns the rows of an experiment's event log into a
// readout, in two steps that meet at a small, mergeable value.
//
// First, a Tallier applies the event semantics of one Spec to Arrow record
// batches of the logical event table (see ColUser and friends; package
// ingest produces them from Parquet and CSV files):
//
//   - exposures outside the analysis window [Start, End) are ignored, and so
//     are metric events at or after End;
//   - a unit's first exposure t0 is its earliest in-window exposure, and its
//     arm is that row's arm;
//   - a unit exposed to two or more arms is left out (MultiArmExclude) or
//     kept in its first arm (MultiArmFirst, where a tie at t0 leaves it out);
//   - a unit converts on a metric when one of the metric's events falls in
//     [t0, t0+W), counted once per unit;
//   - with a finite window W, a unit with t0+W beyond End (or beyond the
//     data's freshness when there is no End) is immature, and left out by
//     default;
//   - every row and unit left out is counted by reason.
//
// The Tallier works in two stages: first one UnitRecord per exposed unit
// (its arm, first exposure, segment values, status under the multi-arm
// policy, and per metric whether it converted and whether it is immature),
// then an Accumulator sums the records. The unit table (UnitTableTallier)
// reduces to the same records; a table of counts already aggregated
// (CountsTallier) goes to the sums directly. All three input shapes meet
// in the same Tally.
//
// The result is a Tally: per arm and metric, units and conversions, overall
// and per value of each segment dimension (Spec.Segments). Counts of
// disjoint sets of units add up, which is what lets the same tally be
// computed file by file, partition by partition or inside a warehouse;
// MergeTallies says when such a merge is exact.
//
// Second, Analyze turns a Tally into a Readout with the statistics of
// package experiment/stats: Wilson score intervals per arm; for each
// treatment against the control the Newcombe hybrid score interval of the
// difference, the Katz log interval of the relative lift and the pooled
// two-proportion z test decided by both routes (statistic against critical
// value, p-value against alpha), with Fisher's exact test where the normal
// approximation is not justified; the one-proportion z test against a
// metric's target rate (the exact binomial test where its condition
// fails); and the Pearson chi-square sample ratio check against the
// planned split. With segment dimensions, each metric is broken down by
// segment value with the same per-arm rates and comparisons, decided at
// alpha without adjustment and flagged as exploratory (Segmentation).
// Analyze sees counts only, never rows.
//
// Package report renders a Readout as Markdown and JSON.
package experiment
