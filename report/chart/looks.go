package chart

import (
	"fmt"
	"image/color"
	"io"
	"math"
	"slices"
	"time"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/history"
	"github.com/armtally/armtally/experiment/stats"
)

// armColours are the arms' colours in arm order (the control first),
// repeated past the last.
var armColours = []color.RGBA{
	{R: 0x55, G: 0x55, B: 0x55, A: 0xff},
	{R: 0x1f, G: 0x4e, B: 0x79, A: 0xff},
	{R: 0xd3, G: 0x7b, B: 0x16, A: 0xff},
	{R: 0x2e, G: 0x8b, B: 0x57, A: 0xff},
	{R: 0x8e, G: 0x44, B: 0xad, A: 0xff},
}

const looksPanelHeight = 2.6 * vg.Inch

// series is the plotted data of the chart over the looks, before gonum
// draws it: x is the look's instant in Unix seconds.
type series struct {
	metric string
	arms   []string
	// rate[a] are arm a's cumulative rate points with their Wilson
	// interval at the readout's level; daily[a] its new units per day
	// between consecutive looks (at the later look).
	rate, daily [][]point
	// stat[t] are treatment t's points: the z statistic with the
	// boundary (group-sequential) or the difference with the
	// confidence sequence (mixture), as lo/hi.
	stat      [][]point
	statLabel string
}

type point struct{ x, y, lo, hi float64 }

// lookSeries gathers the series of metric from the looks (in time order):
// the arms of the readout r, each look's counts and stored comparisons.
func lookSeries(r experiment.Readout, metric string, looks []history.Look) series {
	s := series{metric: metric}
	var treatments []string
	for _, a := range r.Arms {
		s.arms = append(s.arms, a.Name)
		if a.Name != r.Control {
			treatments = append(treatments, a.Name)
		}
	}
	s.rate, s.daily, s.stat = make([][]point, len(s.arms)), make([][]point, len(s.arms)), make([][]point, len(treatments))
	level := r.Settings.ConfidenceLevel
	if !(level > 0 && level < 1) {
		level = 0.95
	}
	s.statLabel = "z statistic and boundary"
	for li, l := range looks {
		x := float64(l.At.Unix())
		for ai, arm := range s.arms {
			for _, a := range l.Arms {
				if a.Metric != metric || a.Arm != arm || a.Units == 0 {
					continue
				}
				iv, err := stats.Wilson(a.Conversions, a.Units, level)
				if err == nil {
					p := float64(a.Conversions) / float64(a.Units)
					s.rate[ai] = append(s.rate[ai], point{x, 100 * p, 100 * iv.Lower, 100 * iv.Upper})
				}
				if li > 0 {
					if prev, ok := unitsAt(looks[li-1], metric, arm); ok {
						days := l.At.Sub(looks[li-1].At).Hours() / 24
						s.daily[ai] = append(s.daily[ai], point{x: x, y: float64(a.Units-prev) / days})
					}
				}
			}
		}
		for ti, tr := range treatments {
			for _, c := range l.Comparisons {
				if c.Metric != metric || c.Arm != tr {
					continue
				}
				switch c.Method {
				case experiment.MethodGroupSequential:
					s.stat[ti] = append(s.stat[ti], point{x, c.Statistic, -c.Boundary, c.Boundary})
				case experiment.MethodMixture:
					s.statLabel = "difference (pp) and confidence sequence"
					s.stat[ti] = append(s.stat[ti], point{x, 100 * mixtureDiff(l, metric, tr, r.Control), 100 * c.SequenceLower, 100 * c.SequenceUpper})
				}
			}
		}
	}
	return s
}

func unitsAt(l history.Look, metric, arm string) (int64, bool) {
	for _, a := range l.Arms {
		if a.Metric == metric && a.Arm == arm {
			return a.Units, true
		}
	}
	return 0, false
}

func mixtureDiff(l history.Look, metric, treatment, control string) float64 {
	rate := func(arm string) float64 {
		for _, a := range l.Arms {
			if a.Metric == metric && a.Arm == arm && a.Units > 0 {
				return float64(a.Conversions) / float64(a.Units)
			}
		}
		return math.NaN()
	}
	return rate(treatment) - rate(control)
}

// LooksMetric returns the metric the chart over the looks shows: the
// first with a sequential comparison, else the first metric.
func LooksMetric(r experiment.Readout) string {
	if r.Monitoring != nil && len(r.Monitoring.Comparisons) > 0 {
		return r.Monitoring.Comparisons[0].Metric
	}
	if len(r.Metrics) > 0 {
		return r.Metrics[0].Name
	}
	return ""
}

// WriteLooks draws the looks of a monitored experiment (in time order,
// tonight's included) as three panels over the looks' instants: each
// arm's cumulative conversion rate on the metric with its Wilson interval
// at the readout's confidence level; each treatment's z statistic with
// the group-sequential boundary (dashed, +/- the critical value), or for
// the mixture test its difference with the confidence sequence; and each
// arm's new units per day between looks (where a sample-ratio problem
// would start). The same looks and readout give the same bytes.
func WriteLooks(w io.Writer, r experiment.Readout, looks []history.Look, opts Options) error {
	looks = slices.Clone(looks)
	slices.SortStableFunc(looks, func(a, b history.Look) int { return a.At.Compare(b.At) })
	s := lookSeries(r, LooksMetric(r), looks)
	height := titleSpace + 3*looksPanelHeight
	canvas, err := newCanvas(opts.Format, height)
	if err != nil {
		return err
	}
	dc := draw.New(canvas)
	title := "Experiment " + shownName(r.Experiment) + ": " + shownName(s.metric) + " over " + fmt.Sprint(len(looks)) + " looks"
	dc.FillText(textStyle(13, draw.XCenter, draw.YTop), vg.Point{X: pageWidth / 2, Y: height - 0.25*vg.Inch}, title)
	plots := []*plot.Plot{
		looksPlot("conversion rate (%) with interval", s.arms, s.rate, true, 0),
		looksPlot(s.statLabel, s.arms[min(1, len(s.arms)):], s.stat, true, 1),
		looksPlot("new units per day", s.arms, s.daily, false, 0),
	}
	for i, p := range plots {
		top := height - titleSpace - vg.Length(i)*looksPanelHeight
		p.Draw(draw.Crop(dc, 0, 0, top-looksPanelHeight, -(height - top)))
	}
	_, err = canvas.WriteTo(w)
	return err
}

// looksPlot is one panel: a line with points per series (in the colour
// of arm i + offset), and dashed lines at lo and hi when bands is set.
// Points that are not finite (a look not tested, no boundary left) are
// left out.
func looksPlot(title string, names []string, data [][]point, bands bool, offset int) *plot.Plot {
	pl := plot.New()
	pl.Title.Text = title
	pl.Title.TextStyle = textStyle(11, draw.XCenter, draw.YTop)
	pl.X.Tick.Marker = plot.TimeTicks{Format: "2006-01-02", Time: func(t float64) time.Time { return time.Unix(int64(t), 0).UTC() }}
	pl.X.Tick.Label = textStyle(8, draw.XCenter, draw.YTop)
	pl.Y.Tick.Label = textStyle(9, draw.XRight, draw.YCenter)
	pl.Legend.TextStyle = textStyle(9, draw.XLeft, draw.YCenter)
	pl.Legend.Top, pl.Legend.Left = true, true
	pl.Legend.Padding = vg.Points(6)
	pl.Legend.YOffs = -vg.Points(2)
	grid := plotter.NewGrid()
	grid.Vertical.Color, grid.Horizontal.Color = gridColour, gridColour
	pl.Add(grid)
	for i, d := range data {
		if len(d) == 0 || i >= len(names) {
			continue
		}
		col := armColours[(i+offset)%len(armColours)]
		var xy, lo, hi plotter.XYs
		for _, p := range d {
			if finite(p.y) {
				xy = append(xy, plotter.XY{X: p.x, Y: p.y})
			}
			if finite(p.lo) && finite(p.hi) {
				lo, hi = append(lo, plotter.XY{X: p.x, Y: p.lo}), append(hi, plotter.XY{X: p.x, Y: p.hi})
			}
		}
		line, points, err := plotter.NewLinePoints(xy)
		if err != nil {
			continue
		}
		line.Color, points.Color = col, col
		pl.Add(line, points)
		pl.Legend.Add(shownName(names[i]), line, points)
		if !bands {
			continue
		}
		for _, b := range []plotter.XYs{lo, hi} {
			if l, err := plotter.NewLine(b); err == nil && len(b) > 0 {
				l.Color, l.Dashes = col, []vg.Length{vg.Points(4), vg.Points(3)}
				pl.Add(l)
			}
		}
	}
	return pl
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
