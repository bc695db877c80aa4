package experiment

import (
	"fmt"

	"github.com/armtally/armtally/experiment/stats"
)

// DefaultSampleRatioThreshold is the p-value below which the sample ratio
// check flags a mismatch (common practice: 0.001).
const DefaultSampleRatioThreshold = 0.001

// AnalysisOptions are the settings of the statistics. Build them from
// DefaultAnalysisOptions and change what differs.
type AnalysisOptions struct {
	// Stats holds alpha, the confidence level, the alternative and the
	// minimum count of the normal-approximation rule. A Level of 0 means
	// 1 - alpha for a two-sided alternative and 1 - 2 alpha for a
	// one-sided one, so that every interval matches its test.
	Stats stats.Options
	// Interval is the interval of each arm's rate (Wilson by default).
	Interval IntervalMethod
	// Difference is the interval of each difference (Newcombe by
	// default).
	Difference DifferenceMethod
	// Adjust is the multiple-comparison adjustment over the family of
	// comparisons (each treatment against the control on each metric that
	// is not a guardrail).
	Adjust stats.AdjustMethod
	// NonInferiority is the variance of guardrail tests.
	NonInferiority stats.NonInferiorityMethod
	// SampleRatioThreshold is the p-value below which the sample ratio
	// check flags a mismatch.
	SampleRatioThreshold float64
	// BadRows are the producer's bad-row counts by reason, copied into the
	// diagnostics as they are.
	BadRows []ReasonCount
	// RowsRead, when positive, is the number of rows the producer read
	// (valid or not); otherwise the tally's own count of valid rows is
	// reported.
	RowsRead int64
}

// DefaultAnalysisOptions returns alpha 0.05 with intervals at the matching
// level, a two-sided alternative, a minimum count of 5, Wilson and
// Newcombe intervals, Holm's adjustment, the Farrington-Manning score test
// for guardrails and a sample ratio threshold of 0.001.
func DefaultAnalysisOptions() AnalysisOptions {
	so := stats.DefaultOptions()
	so.Level = 0
	return AnalysisOptions{
		Stats:                so,
		Interval:             IntervalWilson,
		Difference:           DifferenceNewcombe,
		Adjust:               stats.Holm,
		NonInferiority:       stats.FarringtonManning,
		SampleRatioThreshold: DefaultSampleRatioThreshold,
	}
}

// resolved returns the options with the defaults of their zero values
// filled in (the level, the minimum count, the sample ratio threshold),
// or an error naming the first setting out of range or unknown.
func (opts AnalysisOptions) resolved() (AnalysisOptions, error) {
	so := &opts.Stats
	if !(so.Alpha > 0 && so.Alpha < 0.5) {
		return opts, fmt.Errorf("alpha %v is not strictly between 0 and 0.5", so.Alpha)
	}
	if so.Level == 0 {
		so.Level = 1 - so.Alpha
		if so.Alternative != stats.TwoSided {
			so.Level = 1 - 2*so.Alpha
		}
	}
	if !(so.Level > 0 && so.Level < 1) {
		return opts, fmt.Errorf("confidence level %v is not strictly between 0 and 1", so.Level)
	}
	so.MinCount = max(so.MinCount, 1)
	if opts.SampleRatioThreshold == 0 {
		opts.SampleRatioThreshold = DefaultSampleRatioThreshold
	}
	if !(opts.SampleRatioThreshold > 0 && opts.SampleRatioThreshold < 1) {
		return opts, fmt.Errorf("sample ratio threshold %v is not strictly between 0 and 1", opts.SampleRatioThreshold)
	}
	for _, o := range []struct {
		what  string
		value option
	}{
		{"alternative", so.Alternative},
		{"interval method", opts.Interval},
		{"difference interval method", opts.Difference},
		{"multiple-comparison adjustment", opts.Adjust},
		{"non-inferiority method", opts.NonInferiority},
	} {
		if !o.value.Valid() {
			return opts, fmt.Errorf("unknown %s %v", o.what, o.value)
		}
	}
	return opts, nil
}

// option is an option enum.
type option interface {
	Valid() bool
	String() string
}

// IntervalMethod is the confidence interval of one arm's rate.
type IntervalMethod int

// Interval methods; the zero value is the default.
const (
	// IntervalWilson is the Wilson score interval.
	IntervalWilson IntervalMethod = iota
	// IntervalClopperPearson is the Clopper-Pearson exact interval.
	IntervalClopperPearson
	// IntervalAgrestiCoull is the Agresti-Coull interval.
	IntervalAgrestiCoull
	// IntervalWald is the Wald interval.
	IntervalWald
)

// String returns "wilson", "clopper-pearson", "agresti-coull" or "wald",
// the names ParseIntervalMethod reads.
func (m IntervalMethod) String() string {
	switch m {
	case IntervalWilson:
		return "wilson"
	case IntervalClopperPearson:
		return "clopper-pearson"
	case IntervalAgrestiCoull:
		return "agresti-coull"
	case IntervalWald:
		return "wald"
	}
	return fmt.Sprintf("IntervalMethod(%d)", int(m))
}

// Valid reports whether m is one of the methods above.
func (m IntervalMethod) Valid() bool { return m >= IntervalWilson && m <= IntervalWald }

// ParseIntervalMethod parses the names String returns, exactly.
func ParseIntervalMethod(s string) (IntervalMethod, error) {
	for m := IntervalWilson; m <= IntervalWald; m++ {
		if s == m.String() {
			return m, nil
		}
	}
	return IntervalWilson, fmt.Errorf("%q: want wilson, clopper-pearson, agresti-coull or wald", s)
}

// DifferenceMethod is the confidence interval of a difference of two
// rates.
type DifferenceMethod int

// Difference interval methods; the zero value is the default.
const (
	// DifferenceNewcombe is Newcombe's hybrid score interval.
	DifferenceNewcombe DifferenceMethod = iota
	// DifferenceWald is the unpooled Wald interval.
	DifferenceWald
)

// String returns "newcombe" or "wald", the names ParseDifferenceMethod
// reads.
func (m DifferenceMethod) String() string {
	switch m {
	case DifferenceNewcombe:
		return "newcombe"
	case DifferenceWald:
		return "wald"
	}
	return fmt.Sprintf("DifferenceMethod(%d)", int(m))
}

// Valid reports whether m is one of the methods above.
func (m DifferenceMethod) Valid() bool { return m == DifferenceNewcombe || m == DifferenceWald }

// ParseDifferenceMethod parses the names String returns, exactly.
func ParseDifferenceMethod(s string) (DifferenceMethod, error) {
	for m := DifferenceNewcombe; m <= DifferenceWald; m++ {
		if s == m.String() {
			return m, nil
		}
	}
	return DifferenceNewcombe, fmt.Errorf("%q: want newcombe or wald", s)
}
