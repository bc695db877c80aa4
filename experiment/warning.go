package experiment

// WarningCode names a caution the analysis raises about a readout, a
// comparison or a test: something the reader should know before trusting
// a number, which does not stop the analysis. Package report words each
// code; Warning holds the numbers the words need.
type WarningCode int

// Warning codes. The fields of Warning each code sets are in brackets.
const (
	// WarnOpenWindowEventLog: the analysis window of an event log has no
	// end, so maturity is judged against the data freshness.
	WarnOpenWindowEventLog WarningCode = iota + 1
	// WarnOpenWindowUnitTable: the analysis window of a unit table has no
	// end, and a unit table carries no conversion times.
	WarnOpenWindowUnitTable
	// WarnOpenWindowCounts: the analysis window of a counts table has no
	// end; only an immature column says which units were immature.
	WarnOpenWindowCounts
	// WarnZNoConversions: the pooled z statistic is undefined because no
	// unit converted in either arm.
	WarnZNoConversions
	// WarnZAllConverted: the pooled z statistic is undefined because every
	// unit converted in both arms.
	WarnZAllConverted
	// WarnFewConversions: an arm has fewer conversions than the normal
	// approximation needs [Arm, Count, MinCount].
	WarnFewConversions
	// WarnFewNonConversions: an arm has fewer non-conversions than the
	// normal approximation needs [Arm, Count, MinCount].
	WarnFewNonConversions
	// WarnFewExpectedConversions: n p0, the conversions expected under a
	// target rate, is below the minimum count [Expected, MinCount].
	WarnFewExpectedConversions
	// WarnFewExpectedNonConversions: n (1 - p0) is below the minimum
	// count [Expected, MinCount].
	WarnFewExpectedNonConversions
	// WarnRelativeMarginZero: a guardrail's margin is relative and the
	// control has no conversions, so the margin is 0.
	WarnRelativeMarginZero
	// WarnNonInferiorityUndefined: the non-inferiority z statistic is
	// undefined because its estimated variance is 0.
	WarnNonInferiorityUndefined
	// WarnNonInferiorityNoFallback: the normal approximation of a
	// guardrail test is not justified, and it has no exact fallback
	// [MinCount].
	WarnNonInferiorityNoFallback
	// WarnStateRecomputed: the run was to add new files to a saved tally
	// state, which could not be used, so every file was read again
	// [Reason].
	WarnStateRecomputed
	// warnEnd is one past the last code.
	warnEnd
)

// Valid reports whether c is one of the codes above.
func (c WarningCode) Valid() bool { return c >= WarnOpenWindowEventLog && c < warnEnd }

// Warning is one caution: its code and the numbers its text needs. Fields
// a code does not use are zero.
type Warning struct {
	Code WarningCode
	// Arm is the arm whose count falls short.
	Arm string
	// Count is the arm's conversions or non-conversions.
	Count int64
	// Expected is the count expected under the target rate.
	Expected float64
	// MinCount is the minimum count of the normal-approximation rule.
	MinCount int64
	// Reason says why a saved state was not used.
	Reason string
}

// openWindowWarnings returns the readout-wide warnings about an analysis
// window with no end.
func openWindowWarnings(spec Spec, input InputShape) []Warning {
	if spec.End != nil {
		return nil
	}
	switch input {
	case InputUnitTable:
		return []Warning{{Code: WarnOpenWindowUnitTable}}
	case InputCounts:
		return []Warning{{Code: WarnOpenWindowCounts}}
	}
	return []Warning{{Code: WarnOpenWindowEventLog}}
}

// fewCountWarnings returns a warning for each count of the two arms that
// falls short of the normal approximation's minimum count, arm 1 first
// (the details of stats.TwoSampleCondition's verdict).
func fewCountWarnings(name1 string, x1, n1 int64, name2 string, x2, n2, minCount int64) []Warning {
	var out []Warning
	for _, a := range []struct {
		name string
		x, n int64
	}{{name1, x1, n1}, {name2, x2, n2}} {
		if a.x < minCount {
			out = append(out, Warning{Code: WarnFewConversions, Arm: a.name, Count: a.x, MinCount: minCount})
		}
		if a.n-a.x < minCount {
			out = append(out, Warning{Code: WarnFewNonConversions, Arm: a.name, Count: a.n - a.x, MinCount: minCount})
		}
	}
	return out
}

// fewExpectedWarnings returns a warning for each expected count under the
// target p0 that falls short of the minimum count (the details of
// stats.OneSampleCondition's verdict).
func fewExpectedWarnings(n int64, p0 float64, minCount int64) []Warning {
	var out []Warning
	if e := float64(n) * p0; e < float64(minCount) {
		out = append(out, Warning{Code: WarnFewExpectedConversions, Expected: e, MinCount: minCount})
	}
	if e := float64(n) * (1 - p0); e < float64(minCount) {
		out = append(out, Warning{Code: WarnFewExpectedNonConversions, Expected: e, MinCount: minCount})
	}
	return out
}
