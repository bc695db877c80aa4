// Package report renders experiment readouts (experiment.Readout) as a
// Markdown readout for an experiment ticket and as versioned JSON for
// dashboards and alerting.
//
// WriteMarkdown writes, per readout: a header (experiment, control arm,
// analysis window, data freshness, settings, the interval methods and the
// multiple-comparison adjustment, and, for a one-sided alternative, why
// the intervals are at 1 - 2 alpha); a block of warnings when the sample
// ratio, exclusions, test conditions, a failed guardrail or a disagreement
// between interval and test call for one; the arms with the sample-ratio
// check; the multiple-comparison family (method, error rate it controls,
// size, members); one section per metric with its per-arm rates and
// intervals, the guardrail's non-inferiority test against its margin, the
// comparisons with the control (with the adjusted p-value and decision,
// and Bonferroni's simultaneous interval) and with a target rate, both
// decision routes written out, numbered notes under the table where they
// arise and a plain-language conclusion worded for the metric's direction,
// then, when the readout has segment dimensions, a compact table of the
// metric by segment (each value's per-arm rates and comparisons, marked
// exploratory);
// the usual cautions, including which adjustment was applied over how many
// comparisons and why segment results are exploratory; and the
// diagnostics, every count shown, with the input shape (what counts
// cannot show is printed as n/a). All numbers pass through one set of formatters
// (format.go): percentages, percentage points, p-values with a floor.
//
// WriteJSON writes a Document: the schema's $id and version, then the
// readouts with the field names of experiment.Readout, floats at full
// precision. Schema returns the JSON Schema (draft 2020-12) that describes
// it exactly. Both writers reject NaN and infinity instead of writing them.
//
// Names from the data are made safe where they are written (the rules are
// those of internal/safetext, described in the README): every Markdown
// line, and every name in the profile, shows control characters, bidi
// controls and bytes that are not UTF-8 as visible escapes, so the output
// is valid UTF-8 and its tables stay whole; the JSON writes each name in a
// one-to-one form (valid UTF-8 without a backslash followed by "x" as it
// is), so names that differ never meet.
//
// WriteAudit writes the first stage of a tally, one row per exposed unit
// (arm, first exposure, segment values, status, conversion and maturity
// flags per metric), as a Parquet table sorted by unit (AuditSchema). The
// module in testdata/auditcheck reads it back with a second Parquet
// library; run it by hand.
//
// Package report/chart draws one readout as a picture (SVG or PNG,
// gonum/plot); MarkdownOptions.ChartPath links it from the Markdown.
//
// Both writers are deterministic: the same readouts give the same bytes.
// Nothing is written to w until the whole output is built, so a failed
// call writes nothing. WriteFileAtomic puts either output in a file with a
// temporary file and a rename, so that readers never see half a readout.
//
// Not checked: that the readouts are consistent with each other (shares
// summing to one, comparisons naming arms of their metric). The report
// prints what it is given and "n/a" where something is missing.
package report
