package chart

import (
	"bytes"
	"encoding/xml"
	"image/png"
	"io"
	"math"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"github.com/armtally/armtally/experiment"
)

// wantPanel is what one metric's panel should plot, in percentage points:
// the fixture's values (printed by testdata/fixtures.R, R 4.x, as cited in
// fixtures_test.go) times 100.
type wantPanel struct {
	title  string
	margin *float64
	level  float64
	rows   []wantRow
}

type wantRow struct {
	label              string
	diff, lower, upper float64
	noDiff, noInterval bool
}

func TestPanels(t *testing.T) {
	tests := []struct {
		name    string
		readout experiment.Readout
		want    []wantPanel
	}{
		{
			// Bonferroni: the reorder panel draws the simultaneous 97.5%
			// intervals (fixtures.R simultaneous(..., 2)); the guardrails
			// draw the 90% interval of their test (fixtures.R noninf,
			// newcombe(..., 0.9)); repeat_visit's relative margin of 3% of
			// the control's 40% is 1.2 points, below zero as higher is
			// better; unsubscribe's 0.5 points are above zero as lower is
			// better.
			name: "guardrails", readout: guardrailReadout(),
			want: []wantPanel{
				{title: "reorder: 97.5% simultaneous interval (Bonferroni)", level: 0.975, rows: []wantRow{
					{label: "email-reminder\n+1.10 pp (+0.48 to +1.72)", diff: 1.0988700944498928, lower: 0.48298401559486275, upper: 1.7151097364467866},
					{label: "push-reminder\n+0.57 pp (-0.03 to +1.18)", diff: 0.57441861910770969, lower: -0.032844401833117317, upper: 1.181741125638253},
				}},
				{title: "repeat_visit (guardrail): 90% interval of the guardrail test, margin -1.20 pp", margin: ptr(-1.2), level: 0.9, rows: []wantRow{
					{label: "email-reminder\n-0.20 pp (-0.94 to +0.54)", diff: -0.20108923334730133, lower: -0.93724135678010141, upper: 0.53510781645547756},
					{label: "push-reminder\n+0.22 pp (-0.52 to +0.95)", diff: 0.21558872305140753, lower: -0.5193294480465448, upper: 0.95046323485920847},
				}},
				{title: "unsubscribe (guardrail, lower is better): 90% interval of the guardrail test, margin +0.50 pp", margin: ptr(0.5), level: 0.9, rows: []wantRow{
					{label: "email-reminder\n+0.72 pp (+0.50 to +0.95)", diff: 0.72391635450038509, lower: 0.4959647578032942, upper: 0.95295964395909587},
					{label: "push-reminder\n+0.07 pp (-0.14 to +0.29)", diff: 0.073801477134665186, lower: -0.13819789486892095, upper: 0.28587191579032157},
				}},
			},
		},
		{
			// Holm gives no simultaneous interval: the difference interval
			// at 95% (fixtures.R compare(...)).
			name: "holm", readout: holmReadout(),
			want: []wantPanel{
				{title: "reorder: 95% confidence interval", level: 0.95, rows: []wantRow{
					{label: "email-reminder\n+1.10 pp (+0.56 to +1.64)", diff: 1.0988700944498928, lower: 0.56033119374663022, upper: 1.6376794301743838},
					{label: "push-reminder\n+0.57 pp (+0.04 to +1.11)", diff: 0.57441861910770969, lower: 0.043437226979455533, upper: 1.1054455323376601},
				}},
			},
		},
		{
			// Counts of zero: nothing is defined but the guardrail's
			// absolute margin of 1 point, above zero as lower is better.
			name: "empty", readout: emptyReadout(),
			want: []wantPanel{
				{title: "trial_started: confidence interval", rows: []wantRow{
					{label: "annual-first\ndifference undefined, no interval", noDiff: true, noInterval: true},
				}},
				{title: "refund_requested (guardrail, lower is better): interval of the guardrail test, margin +1.00 pp", margin: ptr(1.0), rows: []wantRow{
					{label: "annual-first\ndifference undefined, no interval", noDiff: true, noInterval: true},
				}},
			},
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := panelsOf(tc.readout)
			if len(got) != len(tc.want) {
				t.Fatalf("%d panels, want %d", len(got), len(tc.want))
			}
			for i, w := range tc.want {
				checkPanel(t, got[i], w)
			}
		})
	}
}

func checkPanel(t *testing.T, got panel, w wantPanel) {
	t.Helper()
	if got.title != w.title {
		t.Errorf("title %q, want %q", got.title, w.title)
	}
	if got.level != w.level {
		t.Errorf("%s: level %v, want %v", w.title, got.level, w.level)
	}
	switch {
	case (got.margin == nil) != (w.margin == nil):
		t.Errorf("%s: margin %v, want %v", w.title, got.margin, w.margin)
	case w.margin != nil && !near(*got.margin, *w.margin):
		t.Errorf("%s: margin %v, want %v", w.title, *got.margin, *w.margin)
	}
	if len(got.rows) != len(w.rows) {
		t.Fatalf("%s: %d rows, want %d", w.title, len(got.rows), len(w.rows))
	}
	for j, wr := range w.rows {
		r := got.rows[j]
		if r.label != wr.label {
			t.Errorf("%s row %d: label %q, want %q", w.title, j, r.label, wr.label)
		}
		if (r.diff == nil) != wr.noDiff || (r.lower == nil) != wr.noInterval || (r.upper == nil) != wr.noInterval {
			t.Errorf("%s row %d: defined diff %v, interval %v; want %v, %v", w.title, j, r.diff != nil, r.lower != nil, !wr.noDiff, !wr.noInterval)
			continue
		}
		if r.diff != nil && !near(*r.diff, wr.diff) {
			t.Errorf("%s row %d: difference %v pp, want %v", w.title, j, *r.diff, wr.diff)
		}
		if r.lower != nil && (!near(*r.lower, wr.lower) || !near(*r.upper, wr.upper)) {
			t.Errorf("%s row %d: interval %v to %v pp, want %v to %v", w.title, j, *r.lower, *r.upper, wr.lower, wr.upper)
		}
	}
}

func near(a, b float64) bool {
	return math.Abs(a-b) <= 1e-9*math.Max(1, math.Abs(b))
}

// svgPath matches the paths gonum's SVG writer draws (one per line).
var svgPath = regexp.MustCompile(`<path d="([^"]*)" style="([^"]*)" />`)

// svgNumber matches the coordinates of a path.
var svgNumber = regexp.MustCompile(`-?[0-9]+(?:\.[0-9]+)?(?:e-?[0-9]+)?`)

// marks is what a chart's SVG draws in one panel: the x of its zero
// and margin lines, and per row the ends of the bar and the point.
type marks struct {
	zero, margin float64
	hasMargin    bool
	bars         [][2]float64 // x of each bar's ends, left to right
	barY         []float64
	points       [][2]float64 // centre of each point
}

// readMarks reads the panels of a chart back from its SVG, by the
// colours chart.go gives each mark.
func readMarks(t *testing.T, svg []byte) []marks {
	t.Helper()
	var panels []marks
	for _, m := range svgPath.FindAllSubmatch(svg, -1) {
		style := string(m[2])
		var nums []float64
		for _, s := range svgNumber.FindAllString(string(m[1]), -1) {
			v, err := strconv.ParseFloat(s, 64)
			if err != nil {
				t.Fatal(err)
			}
			nums = append(nums, v)
		}
		last := len(panels) - 1
		switch {
		case strings.Contains(style, "stroke:#555555"):
			panels = append(panels, marks{zero: nums[0]})
		case strings.Contains(style, "stroke:#C0392B"):
			panels[last].margin, panels[last].hasMargin = nums[0], true
		case strings.Contains(style, "stroke:#1F4E79") && nums[1] == nums[3]:
			panels[last].bars = append(panels[last].bars, [2]float64{nums[0], nums[2]})
			panels[last].barY = append(panels[last].barY, nums[1])
		case strings.Contains(style, "fill:#1F4E79"):
			// A circle of radius 4 from its rightmost point: M cx+4,cy A...
			panels[last].points = append(panels[last].points, [2]float64{nums[0] - 4, nums[1]})
		}
	}
	return panels
}

// TestSVGPlacesEachComparison reads the guardrail readout's chart
// back: one point and one bar per comparison, each panel on one linear
// scale that puts 0 on the zero line, the margin on the margin line and
// every point and bar end at the readout's difference and interval, rows
// in the readout's order from the top.
func TestSVGPlacesEachComparison(t *testing.T) {
	r := guardrailReadout()
	svg := render(t, func(b *bytes.Buffer) error { return Write(b, r, Options{}) })
	panels := readMarks(t, svg)
	if len(panels) != len(r.Metrics) {
		t.Fatalf("%d panels drawn, want %d", len(panels), len(r.Metrics))
	}
	const tol = 0.02 // points: the writer prints 5 significant digits
	for i, m := range r.Metrics {
		p := panels[i]
		if len(p.points) != len(m.Comparisons) || len(p.bars) != len(m.Comparisons) {
			t.Fatalf("%s: %d points and %d bars, want %d of each", m.Name, len(p.points), len(p.bars), len(m.Comparisons))
		}
		kind := intervalKind(m)
		iv0 := drawnInterval(kind, m.Comparisons[0])
		scale := (p.bars[0][1] - p.bars[0][0]) / (100 * (iv0.Upper - iv0.Lower))
		at := func(v float64) float64 { return p.zero + 100*v*scale }
		for j, c := range m.Comparisons {
			iv := drawnInterval(kind, c)
			if math.Abs(p.points[j][0]-at(*c.Difference)) > tol {
				t.Errorf("%s %s: point at x = %v, want %v", m.Name, c.Treatment, p.points[j][0], at(*c.Difference))
			}
			if math.Abs(p.bars[j][0]-at(iv.Lower)) > tol || math.Abs(p.bars[j][1]-at(iv.Upper)) > tol {
				t.Errorf("%s %s: bar %v, want %v to %v", m.Name, c.Treatment, p.bars[j], at(iv.Lower), at(iv.Upper))
			}
			if p.points[j][1] != p.barY[j] {
				t.Errorf("%s %s: point at y = %v, its bar at %v", m.Name, c.Treatment, p.points[j][1], p.barY[j])
			}
			if j > 0 && !(p.points[j][1] < p.points[j-1][1]) {
				t.Errorf("%s: row %d is not below row %d", m.Name, j, j-1)
			}
		}
		if m.Guardrail == nil {
			if p.hasMargin {
				t.Errorf("%s: a margin line on a metric that is not a guardrail", m.Name)
			}
			continue
		}
		margin := m.Comparisons[0].NonInferiority.AbsoluteMargin
		if !m.LowerIsBetter {
			margin = -margin
		}
		if !p.hasMargin || math.Abs(p.margin-at(margin)) > tol {
			t.Errorf("%s: margin line at x = %v (drawn: %v), want %v", m.Name, p.margin, p.hasMargin, at(margin))
		}
	}
}

// TestRepeatable writes each chart twice in both formats: the bytes
// must be the same (render fails otherwise), the SVG well-formed XML and
// the PNG a PNG.
func TestRepeatable(t *testing.T) {
	for _, rs := range [][]experiment.Readout{{guardrailReadout(), holmReadout(), emptyReadout()}} {
		for _, r := range rs {
			svg := render(t, func(b *bytes.Buffer) error { return Write(b, r, Options{Format: SVG}) })
			checkXML(t, svg)
			img := render(t, func(b *bytes.Buffer) error { return Write(b, r, Options{Format: PNG}) })
			if _, err := png.Decode(bytes.NewReader(img)); err != nil {
				t.Errorf("%s: PNG: %v", r.Experiment, err)
			}
		}
	}
}

// checkXML fails unless doc is well-formed XML (which also rules out the
// control characters XML 1.0 forbids).
func checkXML(t *testing.T, doc []byte) {
	t.Helper()
	d := xml.NewDecoder(bytes.NewReader(doc))
	for {
		_, err := d.Token()
		if err == io.EOF {
			return
		}
		if err != nil {
			t.Fatalf("not well-formed XML: %v", err)
		}
	}
}

// TestNamesFromData gives the arms, the metric and the experiment
// names that would break the SVG or hide text: markup, a control
// sequence, a bidi override, invalid UTF-8, a line break and a long name.
func TestNamesFromData(t *testing.T) {
	long := strings.Repeat("very-long-arm-name-", 6)
	r := guardrailReadout()
	r.Experiment = "</text><script>alert(1)</script>"
	r.Metrics[0].Name = "re\norder & <b>"
	for _, m := range r.Metrics {
		m.Comparisons[0].Treatment = "\x1b[31mred\u202egreen\xff"
		m.Comparisons[1].Treatment = long
	}
	svg := render(t, func(b *bytes.Buffer) error { return Write(b, r, Options{}) })
	checkXML(t, svg)
	s := string(svg)
	for _, bad := range []string{"<script>", "<b>", "\x1b", "\u202e", "\xff"} {
		if strings.Contains(s, bad) {
			t.Errorf("the SVG holds %q as it is", bad)
		}
	}
	for _, want := range []string{
		"Experiment &lt;/text&gt;&lt;script&gt;alert(1)&lt;/script&gt;",
		`\x1b[31mred\u202egreen\xff`,
		"re\\x0aorder &amp; &lt;b&gt;: 97.5% simultaneous interval",
		long[:nameMax] + "... (114 bytes)",
	} {
		if !strings.Contains(s, want) {
			t.Errorf("the SVG lacks %q", want)
		}
	}
	if strings.Contains(s, long) {
		t.Errorf("the long name is not cut")
	}
	if n := len(readMarks(t, svg)); n != 3 {
		t.Errorf("%d panels, want 3", n)
	}
}

// TestMissingValues draws readouts with nothing or little defined:
// no metrics, a metric without comparisons, NaN and infinite values, an
// interval upside down, an empty experiment key. Nothing panics, each
// chart is drawn, and only the defined marks appear.
func TestMissingValues(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	noMetrics := emptyReadout()
	noMetrics.Metrics = nil
	noMetrics.Experiment = ""
	noComparisons := emptyReadout()
	noComparisons.Metrics[0].Comparisons = nil
	odd := guardrailReadout()
	odd.Metrics = odd.Metrics[:2]
	// reorder: the first difference NaN and its interval unbounded below;
	// repeat_visit: the first interval upside down and its margin NaN (the
	// line comes from the second comparison).
	odd.Metrics[0].Comparisons[0].Difference = &nan
	odd.Metrics[0].Comparisons[0].Adjusted.DifferenceInterval = &experiment.Interval{Lower: -inf, Upper: 0.01, Level: 0.975}
	odd.Metrics[1].Comparisons[0].NonInferiority.Interval = &experiment.Interval{Lower: 0.02, Upper: 0.01, Level: 0.9}
	odd.Metrics[1].Comparisons[0].NonInferiority.AbsoluteMargin = nan
	tests := []struct {
		name           string
		r              experiment.Readout
		points, bars   int
		panels, margin int
	}{
		{name: "no metrics", r: noMetrics},
		{name: "no comparisons", r: noComparisons, panels: 2, margin: 1},
		{name: "empty counts", r: emptyReadout(), panels: 2, margin: 1},
		{name: "NaN, infinity, upside down", r: odd, panels: 2, points: 3, bars: 2, margin: 1},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			svg := render(t, func(b *bytes.Buffer) error { return Write(b, tc.r, Options{}) })
			checkXML(t, svg)
			render(t, func(b *bytes.Buffer) error { return Write(b, tc.r, Options{Format: PNG}) })
			panels := readMarks(t, svg)
			var points, bars, margins int
			for _, p := range panels {
				points, bars = points+len(p.points), bars+len(p.bars)
				if p.hasMargin {
					margins++
				}
			}
			if len(panels) != tc.panels || points != tc.points || bars != tc.bars || margins != tc.margin {
				t.Errorf("%d panels, %d points, %d bars, %d margin lines; want %d, %d, %d, %d",
					len(panels), points, bars, margins, tc.panels, tc.points, tc.bars, tc.margin)
			}
		})
	}
	if err := Write(io.Discard, guardrailReadout(), Options{Format: 7}); err == nil {
		t.Error("an unknown format gave no error")
	}
}

func TestFormatOf(t *testing.T) {
	for path, want := range map[string]Format{
		"chart.svg": SVG, "chart.png": PNG, "out/CHART.PNG": PNG, "chart": SVG, "chart.png.svg": SVG,
	} {
		if got := FormatOf(path); got != want {
			t.Errorf("FormatOf(%q) = %v, want %v", path, got, want)
		}
	}
}

// render runs write twice on fresh buffers and fails unless both runs give
// the same bytes.
func render(t *testing.T, write func(*bytes.Buffer) error) []byte {
	t.Helper()
	var runs [2]bytes.Buffer
	for i := range runs {
		if err := write(&runs[i]); err != nil {
			t.Fatal(err)
		}
	}
	if !bytes.Equal(runs[0].Bytes(), runs[1].Bytes()) {
		t.Fatalf("two runs differ (%d and %d bytes)", runs[0].Len(), runs[1].Len())
	}
	return runs[0].Bytes()
}
