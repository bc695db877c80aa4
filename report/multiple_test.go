package report

import (
	"bytes"
	"strings"
	"testing"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/stats"
)

// familiesReadout analyses two arms on a primary, a secondary and a
// guardrail metric (counts of R 4.2.2 prop.test cases; the test reads the
// wording, not the numbers).
func familiesReadout(t *testing.T, adjust stats.AdjustMethod) experiment.Readout {
	t.Helper()
	spec := experiment.Spec{Key: "gift-wrap", ExposureEvent: "seen", Control: "control", Arms: []string{"control", "wrap"},
		Metrics: []experiment.Metric{
			{Name: "buy", Events: []string{"buy"}},
			{Name: "share", Events: []string{"share"}, Role: experiment.Secondary},
			{Name: "cart", Events: []string{"cart"}, Role: experiment.Secondary},
			{Name: "refund", Events: []string{"refund"}, Guardrail: &experiment.Margin{Value: 0.01}},
		}}
	arm := func(name string, xs ...int64) experiment.ArmTally {
		a := experiment.ArmTally{Name: name, Units: 10000, Exposed: 10000}
		for _, x := range xs {
			a.Metrics = append(a.Metrics, experiment.Count{Conversions: x, Units: 10000})
		}
		return a
	}
	opts := experiment.DefaultAnalysisOptions()
	opts.Adjust = adjust
	r, err := experiment.Analyze(spec, experiment.Tally{Arms: []experiment.ArmTally{
		arm("control", 1000, 400, 300, 1200), arm("wrap", 1090, 455, 310, 1180)}}, opts)
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// The readout states both families: the confirmatory one of the primary
// metrics and the secondary one, each with its size, and marks the
// secondary comparisons' rows.
func TestMarkdownStatesBothFamilies(t *testing.T) {
	for _, adjust := range []stats.AdjustMethod{stats.Holm, stats.Bonferroni} {
		r := familiesReadout(t, adjust)
		var buf bytes.Buffer
		if err := WriteMarkdown(&buf, []experiment.Readout{r}, MarkdownOptions{}); err != nil {
			t.Fatal(err)
		}
		md := buf.String()
		for _, want := range []string{
			"**Confirmatory family** (primary metrics; they decide): ",
			"over a family of 1 comparison",
			"`wrap` against `control` on `buy`.",
			"**Secondary family** (secondary metrics; they never change the decision): ",
			"over a family of 2 comparisons",
			"`wrap` against `control` on `share` and `cart`.",
			"over 2 comparisons (secondary family)",
			"adjustment in the secondary family, as before it",
			"The 2 comparisons on the secondary metrics `share` and `cart` were adjusted apart, in a family of their own by the same method",
			"Outside the families, each at alpha 0.05 on its own: guardrail metrics",
		} {
			if !strings.Contains(md, want) {
				t.Errorf("%s: the readout lacks %q", adjust, want)
			}
		}
		if adjust == stats.Bonferroni && !strings.Contains(md, "each difference gets a 97.5% interval (1 - 0.05 / 2)") {
			t.Errorf("bonferroni: the secondary family's simultaneous level is not 1 - 0.05/2 (Bonferroni's rule)")
		}
	}
}
