package report

import (
	"bytes"
	"strings"
	"testing"
	"time"

	"github.com/armtally/armtally/experiment"
)

// TestMonitoringSection writes a readout with a monitoring state and
// checks the words the reader decides on: the look, the method, the
// boundary and where it was crossed (or the always-valid p-value and the
// sequence), the progress; and that its JSON validates against the
// schema.
func TestMonitoringSection(t *testing.T) {
	f := func(v float64) *float64 { return &v }
	at := time.Date(2026, 11, 12, 0, 0, 0, 0, time.UTC)
	prev := at.AddDate(0, 0, -1)
	mon := &experiment.Monitoring{Look: 4, LookAt: at, KeyKind: "as-of", PreviousAt: &prev, History: true, PlannedUnits: 2000,
		Comparisons: []experiment.SequentialComparison{
			{Metric: "buy", Treatment: "t", Control: "control", Method: experiment.MethodGroupSequential, Spending: "O'Brien-Fleming-type",
				Alpha: 0.05, Sides: "two-sided", Look: 4, InformationFraction: f(0.5), AlphaSpent: f(0.0056), Boundary: f(2.9626),
				BoundaryP: f(0.0031), Statistic: f(3.4), Crossed: true, CrossedAtLook: 3},
			{Metric: "buy", Treatment: "u", Control: "control", Method: experiment.MethodMixture, Alpha: 0.05, Sides: "two-sided", Look: 4,
				MixingVariance: f(1e-4), AlwaysValidP: f(0.2), SequenceLower: f(-0.01), SequenceUpper: f(0.02), Statistic: f(1.1)},
		},
		Progress: []experiment.ArmProgress{{Arm: "control", Units: 1000, PlannedUnits: 2000, DailyUnits: f(100)}},
		DaysLeft: f(10), Changes: []experiment.Change{{Kind: "decision_flipped", Metric: "buy", Treatment: "t", Details: "x"}},
	}
	r := twoArmReadout()
	r.Monitoring = mon
	var md bytes.Buffer
	if err := WriteMarkdown(&md, []experiment.Readout{r}, MarkdownOptions{LooksChartPath: "looks.svg"}); err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"## Monitoring", "Look 4, at 2026-11-12 00:00:00 UTC (keyed by --as-of)",
		"| 4 | 50.00% | 0.0056 (0.05) | \\|z\\| ≥ 2.96 (p ≤ 0.0031) | 3.40 | **crossed at look 3** |",
		"always-valid p 0.2000; sequence -1.00 to +2.00 pp", "decision flipped", "Days left at the observed rate: 10.0.", "[looks.svg](looks.svg)"} {
		if !strings.Contains(md.String(), want) {
			t.Errorf("the Markdown lacks %q:\n%s", want, md.String())
		}
	}
	var js bytes.Buffer
	if err := WriteJSON(&js, []experiment.Readout{r}); err != nil {
		t.Fatal(err)
	}
	if err := compileSchema(t).Validate(decode(t, js.Bytes())); err != nil {
		t.Errorf("the JSON does not validate: %v", err)
	}
}
