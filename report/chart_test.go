package report

import (
	"bytes"
	"strings"
	"testing"

	"github.com/armtally/armtally/experiment"
)

// TestMarkdownChartLink: the link is there only with ChartPath, above the
// first metric section, percent-encoded, and per readout with several.
func TestMarkdownChartLink(t *testing.T) {
	const intro = "Chart of each treatment's difference from the control with its interval, per metric: "
	tests := []struct {
		name     string
		readouts []experiment.Readout
		path     string
		want     []string
	}{
		{name: "none", readouts: []experiment.Readout{twoArmReadout()}},
		{name: "one", readouts: []experiment.Readout{twoArmReadout()}, path: "chart.svg",
			want: []string{intro + "[chart.svg](chart.svg)"}},
		{name: "odd characters", readouts: []experiment.Readout{twoArmReadout()}, path: "../charts/a b(1)_[x]:.svg",
			want: []string{intro + `[a b(1)\_\[x\]:.svg](../charts/a%20b%281%29_%5Bx%5D%3A.svg)`}},
		{name: "two readouts", readouts: []experiment.Readout{twoArmReadout(), guardrailReadout()}, path: "out/c.png",
			want: []string{intro + "[c-" + twoArmReadout().Experiment + ".png](out/c-" + twoArmReadout().Experiment + ".png)",
				intro + "[c-reorder-reminder.png](out/c-reorder-reminder.png)"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var b bytes.Buffer
			if err := WriteMarkdown(&b, tc.readouts, MarkdownOptions{ChartPath: tc.path}); err != nil {
				t.Fatal(err)
			}
			var got []string
			lines := strings.Split(b.String(), "\n")
			for i, line := range lines {
				if !strings.HasPrefix(line, "Chart of") {
					continue
				}
				got = append(got, line)
				// The next heading is the first metric's.
				for _, next := range lines[i+1:] {
					if strings.HasPrefix(next, "#") {
						if !strings.Contains(next, "Metric") {
							t.Errorf("the link is followed by %q, not the first metric", next)
						}
						break
					}
				}
			}
			if strings.Join(got, "\n") != strings.Join(tc.want, "\n") {
				t.Errorf("links:\n%s\nwant:\n%s", strings.Join(got, "\n"), strings.Join(tc.want, "\n"))
			}
		})
	}
}
