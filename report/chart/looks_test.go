package chart

import (
	"bytes"
	"image/png"
	"math"
	"regexp"
	"testing"
	"time"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/history"
)

// testLooks returns n daily looks of a two-arm experiment on metric buy:
// 100 new units per arm a day, the control converting 10% and the
// treatment 12%, with a stored comparison of the given method; the look
// numbered notTested (1-based; 0 none) has no statistic, as a look that
// was not tested.
func testLooks(n int, method string, notTested int) []history.Look {
	var looks []history.Look
	at := time.Date(2026, 11, 3, 0, 0, 0, 0, time.UTC)
	for j := 1; j <= n; j++ {
		units := int64(100 * j)
		c := history.ComparisonLook{Metric: "buy", Arm: "t", Control: "control", Method: method, Statistic: 0.3 * float64(j),
			Boundary: 4 / math.Sqrt(float64(j)), SequenceLower: -0.05, SequenceUpper: 0.08, InformationFraction: float64(j) / 10}
		if j == notTested {
			c.Statistic = math.NaN()
		}
		looks = append(looks, history.Look{Experiment: "exp", At: at.AddDate(0, 0, j-1), KeyKind: history.AsOf,
			Arms: []history.ArmLook{{Metric: "buy", Arm: "control", Units: units, Conversions: units / 10},
				{Metric: "buy", Arm: "t", Units: units, Conversions: 12 * units / 100}},
			Comparisons: []history.ComparisonLook{c}})
	}
	return looks
}

var circle = regexp.MustCompile(`d="M[-0-9.]+,[-0-9.]+A`)

// TestWriteLooks counts the points the SVG draws (each a circle path):
// per look, one rate point per arm and one statistic point per treatment
// (none for a look not tested), one units-per-day point per arm from the
// second look on, and one glyph per legend entry (2 + 1 + 2); the same
// looks in another order give the same bytes, and the PNG decodes.
func TestWriteLooks(t *testing.T) {
	r := experiment.Readout{Experiment: "exp", Control: "control", Settings: experiment.Settings{ConfidenceLevel: 0.95},
		Arms: []experiment.ArmUnits{{Name: "control"}, {Name: "t"}}, Metrics: []experiment.MetricReadout{{Name: "buy"}}}
	cases := []struct {
		name      string
		n         int
		method    string
		notTested int
		points    int
	}{
		{"three looks, group-sequential", 3, experiment.MethodGroupSequential, 0, 2*3 + 3 + 2*2 + 5},
		{"six looks, one not tested", 6, experiment.MethodGroupSequential, 4, 2*6 + 5 + 2*5 + 5},
		{"four looks, mixture", 4, experiment.MethodMixture, 0, 2*4 + 4 + 2*3 + 5},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			looks := testLooks(tc.n, tc.method, tc.notTested)
			var a, b bytes.Buffer
			if err := WriteLooks(&a, r, looks, Options{}); err != nil {
				t.Fatal(err)
			}
			rev := make([]history.Look, len(looks))
			for i, l := range looks {
				rev[len(looks)-1-i] = l
			}
			if err := WriteLooks(&b, r, rev, Options{}); err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(a.Bytes(), b.Bytes()) {
				t.Error("the same looks in another order give other bytes")
			}
			if got := len(circle.FindAll(a.Bytes(), -1)); got != tc.points {
				t.Errorf("%d points drawn, want %d", got, tc.points)
			}
			var p bytes.Buffer
			if err := WriteLooks(&p, r, looks, Options{Format: PNG}); err != nil {
				t.Fatal(err)
			}
			if _, err := png.Decode(&p); err != nil {
				t.Errorf("PNG: %v", err)
			}
		})
	}
}
