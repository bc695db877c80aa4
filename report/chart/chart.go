// Package chart draws a readout as one picture: each treatment's
// difference from the control with its interval, one panel per metric,
// drawn with gonum.org/v1/plot. It is apart from package report so that
// the readout writers do not carry the plotting library and its fonts.
package chart

import (
	"fmt"
	"image/color"
	"io"
	"math"
	"path/filepath"
	"strconv"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
	"gonum.org/v1/plot/vg/vgsvg"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/ingest/safetext"
	"github.com/armtally/armtally/report"
)

// Format is the file format of a chart.
type Format int

const (
	// SVG is an SVG document (fonts named, not embedded).
	SVG Format = iota
	// PNG is a PNG image at 144 dots per inch.
	PNG
)

// FormatOf returns the format a chart file's name asks for: PNG for a
// name ending in ".png" (any case), SVG for any other.
func FormatOf(path string) Format {
	if strings.EqualFold(filepath.Ext(path), ".png") {
		return PNG
	}
	return SVG
}

// Options shapes a chart. The zero value gives an SVG document.
type Options struct {
	Format Format
}

// The chart's measures: width, the heights of its parts, and font sizes.
const (
	pageWidth  = 7.5 * vg.Inch
	titleSpace = 0.9 * vg.Inch
	panelBase  = 0.95 * vg.Inch // a panel's title and x axis
	rowHeight  = 0.42 * vg.Inch // one comparison
	nameMax    = 32             // bytes of a name shown before it is cut
	pngDPI     = 144
)

var (
	ink          = color.RGBA{R: 0x1f, G: 0x4e, B: 0x79, A: 0xff} // intervals and points
	zeroColour   = color.RGBA{R: 0x55, G: 0x55, B: 0x55, A: 0xff} // the line at 0
	marginColour = color.RGBA{R: 0xc0, G: 0x39, B: 0x2b, A: 0xff} // a guardrail's margin
	gridColour   = color.RGBA{R: 0xd0, G: 0xd0, B: 0xd0, A: 0xff}
)

// panel is one metric's panel: what the chart plots, in percentage
// points, before gonum draws it.
type panel struct {
	title string
	// margin is the guardrail margin on the harmful side (-margin when
	// higher is better, +margin when lower is better); nil for other
	// metrics or when no comparison carries it.
	margin *float64
	// level is the level of the panel's intervals; 0 when none is drawn.
	level float64
	rows  []rowData
}

// rowData is one comparison: the treatment, its difference from the
// control and the interval drawn, each nil when the readout has none.
type rowData struct {
	label        string
	diff         *float64
	lower, upper *float64
}

// Write writes a chart of one readout to w: for each metric, in the
// readout's order, a panel with one row per comparison (treatments in the
// readout's order, top to bottom), a point at the treatment's difference
// from the control in percentage points and a bar over the interval the
// readout reports for it, a line at zero and, for a guardrail, a dashed
// line at the margin on the harmful side. The interval is the guardrail
// test's (1 - 2 alpha, the one read against the margin) for a guardrail,
// Bonferroni's simultaneous interval when the metric has it, and the
// difference interval otherwise; each panel's title names it and its
// level, and the chart's title names the experiment and the level when
// every panel shares it.
//
// What the readout leaves undefined (a difference or interval that is nil,
// NaN or infinite) is left out of the drawing and the row says so. Names
// from the data are shown as safetext.Short makes them, cut after 32
// bytes. The same readout and options give the same bytes: the SVG writer
// names its fonts without embedding them, and nothing depends on the
// time or on map order.
func Write(w io.Writer, r experiment.Readout, opts Options) error {
	panels := panelsOf(r)
	height := titleSpace + panelBase
	if len(panels) > 0 {
		height = titleSpace
		for _, p := range panels {
			height += panelBase + rowHeight*vg.Length(max(len(p.rows), 1))
		}
	}
	canvas, err := newCanvas(opts.Format, height)
	if err != nil {
		return err
	}
	dc := draw.New(canvas)
	drawPage(dc, r, panels)
	_, err = canvas.WriteTo(w)
	return err
}

// newCanvas returns a page of the chart's width and the given height in
// the format asked for.
func newCanvas(f Format, height vg.Length) (vg.CanvasWriterTo, error) {
	switch f {
	case SVG:
		return vgsvg.NewWith(vgsvg.UseWH(pageWidth, height)), nil
	case PNG:
		return vgimg.PngCanvas{Canvas: vgimg.NewWith(vgimg.UseWH(pageWidth, height), vgimg.UseDPI(pngDPI))}, nil
	}
	return nil, fmt.Errorf("chart format %d unknown", f)
}

// drawPage draws the title, the key and the panels on dc.
func drawPage(dc draw.Canvas, r experiment.Readout, panels []panel) {
	dc.SetColor(color.White)
	dc.Fill(dc.Rectangle.Path())
	top := dc.Max.Y - 0.1*vg.Inch
	title := textStyle(13, draw.XCenter, draw.YTop)
	dc.FillText(title, vg.Point{X: dc.Center().X, Y: top}, "Experiment "+shownName(r.Experiment))
	sub := textStyle(10, draw.XCenter, draw.YTop)
	dc.FillText(sub, vg.Point{X: dc.Center().X, Y: top - 0.25*vg.Inch}, subtitle(panels))
	key := textStyle(9, draw.XCenter, draw.YTop)
	dc.FillText(key, vg.Point{X: dc.Center().X, Y: top - 0.47*vg.Inch}, keyLine(panels))
	body := draw.Crop(dc, 0, 0, 0, -titleSpace)
	if len(panels) == 0 {
		note := textStyle(11, draw.XCenter, draw.YCenter)
		dc.FillText(note, body.Center(), "The readout has no metrics.")
		return
	}
	plots := make([][]*plot.Plot, len(panels))
	for i, p := range panels {
		plots[i] = []*plot.Plot{panelPlot(p)}
	}
	// Each tile gets its share of the height; Align lines up the data
	// areas, so that every panel's zero line and arm labels start at the
	// same place.
	tiles := draw.Tiles{Rows: len(panels), Cols: 1, PadLeft: 0.1 * vg.Inch, PadRight: 0.25 * vg.Inch, PadY: 0.08 * vg.Inch, PadBottom: 0.05 * vg.Inch}
	for i, row := range plot.Align(plots, tiles, body) {
		plots[i][0].Draw(row[0])
	}
}

// subtitle says what is drawn and, when every panel's intervals
// share one level, the level.
func subtitle(panels []panel) string {
	title := "Each treatment minus the control"
	level := 0.0
	for _, p := range panels {
		switch {
		case p.level == 0:
		case level == 0:
			level = p.level
		case level != p.level:
			return title + ", intervals at the level of each metric"
		}
	}
	if level == 0 {
		return title
	}
	return title + ", " + report.FormatLevel(level) + " confidence intervals"
}

// keyLine says how to read the marks.
func keyLine(panels []panel) string {
	key := "Point: difference of conversion rates; bar: its interval; grey line: no difference"
	for _, p := range panels {
		if p.margin != nil {
			return key + "; red dashes: guardrail margin (harmful side)"
		}
	}
	return key
}

// panelsOf returns what the chart plots: one panel per metric.
func panelsOf(r experiment.Readout) []panel {
	panels := make([]panel, 0, len(r.Metrics))
	for _, m := range r.Metrics {
		kind := intervalKind(m)
		p := panel{rows: make([]rowData, 0, len(m.Comparisons))}
		for _, c := range m.Comparisons {
			row := rowData{diff: inPoints(c.Difference)}
			iv := drawnInterval(kind, c)
			if iv != nil {
				row.lower, row.upper = inPoints(&iv.Lower), inPoints(&iv.Upper)
				if row.lower == nil || row.upper == nil || *row.lower > *row.upper {
					row.lower, row.upper = nil, nil
				} else if p.level == 0 {
					p.level = iv.Level
				}
			}
			if p.margin == nil && m.Guardrail != nil {
				p.margin = marginLine(m, c)
			}
			row.label = rowLabel(c.Treatment, row)
			p.rows = append(p.rows, row)
		}
		p.title = panelTitle(m, kind, p)
		panels = append(panels, p)
	}
	return panels
}

// The interval a panel draws.
const (
	differenceInterval   = iota // the difference interval
	simultaneousInterval        // Bonferroni's simultaneous interval
	guardrailInterval           // the guardrail test's interval
)

// intervalKind returns the interval the metric's panel draws: the one its
// readout reads the metric by.
func intervalKind(m experiment.MetricReadout) int {
	if m.Guardrail != nil {
		return guardrailInterval
	}
	for _, c := range m.Comparisons {
		if c.Adjusted != nil && c.Adjusted.DifferenceInterval != nil {
			return simultaneousInterval
		}
	}
	return differenceInterval
}

func drawnInterval(kind int, c experiment.Comparison) *experiment.Interval {
	switch kind {
	case guardrailInterval:
		if c.NonInferiority != nil {
			return c.NonInferiority.Interval
		}
		return nil
	case simultaneousInterval:
		if c.Adjusted != nil {
			return c.Adjusted.DifferenceInterval
		}
		return nil
	}
	return c.DifferenceInterval
}

// marginLine returns where a guardrail's margin line goes, in
// percentage points: the comparison's absolute margin (a relative margin
// times the control's rate) on the harmful side, or the margin as given
// when it is absolute and the comparison has no test.
func marginLine(m experiment.MetricReadout, c experiment.Comparison) *float64 {
	var margin float64
	switch {
	case c.NonInferiority != nil:
		margin = c.NonInferiority.AbsoluteMargin
	case !m.Guardrail.Relative:
		margin = m.Guardrail.Margin
	default:
		return nil
	}
	if !m.LowerIsBetter {
		margin = -margin
	}
	return inPoints(&margin)
}

// inPoints returns a difference of rates in percentage points; nil for
// nil, NaN or infinity.
func inPoints(d *float64) *float64 {
	if d == nil || math.IsNaN(*d) || math.IsInf(*d, 0) {
		return nil
	}
	v := *d * 100
	return &v
}

// shownName is a name from the data as the chart shows it.
func shownName(s string) string {
	if s == "" {
		return "(empty)"
	}
	return safetext.Short(s, nameMax)
}

// rowLabel is a row's label: the treatment on one line, its
// difference and interval on the next.
func rowLabel(treatment string, row rowData) string {
	var b strings.Builder
	b.WriteString(shownName(treatment) + "\n")
	switch {
	case row.diff == nil:
		b.WriteString("difference undefined")
	default:
		b.WriteString(report.FormatPoints(*row.diff/100) + " pp")
	}
	if row.lower != nil {
		fmt.Fprintf(&b, " (%s to %s)", report.FormatPoints(*row.lower/100), report.FormatPoints(*row.upper/100))
	} else {
		b.WriteString(", no interval")
	}
	return b.String()
}

// panelTitle names the metric, its role and direction, and the
// interval drawn with its level.
func panelTitle(m experiment.MetricReadout, kind int, p panel) string {
	var b strings.Builder
	b.WriteString(shownName(m.Name))
	var notes []string
	if m.Guardrail != nil {
		notes = append(notes, "guardrail")
	}
	if m.LowerIsBetter {
		notes = append(notes, "lower is better")
	}
	if len(notes) > 0 {
		b.WriteString(" (" + strings.Join(notes, ", ") + ")")
	}
	level := ""
	if p.level != 0 {
		level = report.FormatLevel(p.level) + " "
	}
	switch kind {
	case guardrailInterval:
		fmt.Fprintf(&b, ": %sinterval of the guardrail test", level)
		if p.margin != nil {
			fmt.Fprintf(&b, ", margin %s pp", report.FormatPoints(*p.margin/100))
		}
	case simultaneousInterval:
		fmt.Fprintf(&b, ": %ssimultaneous interval (Bonferroni)", level)
	default:
		fmt.Fprintf(&b, ": %sconfidence interval", level)
	}
	return b.String()
}

// typeface is the chart's typeface, one that gonum ships.
var typeface = font.Font{Typeface: "Liberation", Variant: "Sans"}

func textStyle(size vg.Length, x text.XAlignment, y text.YAlignment) text.Style {
	return text.Style{
		Color:   color.Black,
		Font:    font.From(typeface, size),
		XAlign:  x,
		YAlign:  y,
		Handler: text.Plain{Fonts: font.DefaultCache},
	}
}

// panelPlot returns the plot of one panel.
func panelPlot(p panel) *plot.Plot {
	pl := plot.New()
	pl.Title.Text = p.title
	pl.Title.TextStyle = textStyle(11, draw.XCenter, draw.YTop)
	pl.Title.Padding = 0.08 * vg.Inch
	pl.X.Label.Text = "difference, percentage points"
	pl.X.Label.TextStyle = textStyle(10, draw.XCenter, draw.YBottom)
	pl.X.Tick.Label = textStyle(9, draw.XCenter, draw.YTop)
	pl.Y.Tick.Label = textStyle(9, draw.XRight, draw.YCenter)
	pl.X.Min, pl.X.Max = xRange(p)
	n := len(p.rows)
	pl.Y.Min, pl.Y.Max = -0.6, float64(max(n, 1))-0.4
	ticks := make([]plot.Tick, n)
	for i, row := range p.rows {
		ticks[i] = plot.Tick{Value: rowY(i, n), Label: row.label}
	}
	pl.Y.Tick.Marker = plot.ConstantTicks(ticks)
	pl.X.Tick.Marker = roundTicks{}
	pl.Y.Tick.Length = 0
	pl.Y.LineStyle.Width = 0
	grid := plotter.NewGrid()
	grid.Vertical.Color = gridColour
	grid.Horizontal.Color = nil
	pl.Add(grid, vline{x: 0, style: draw.LineStyle{Color: zeroColour, Width: vg.Points(1)}})
	if p.margin != nil {
		pl.Add(vline{x: *p.margin, style: draw.LineStyle{Color: marginColour, Width: vg.Points(1.2), Dashes: []vg.Length{vg.Points(4), vg.Points(3)}}})
	}
	pl.Add(rowMarks(p.rows))
	if n == 0 {
		pl.Add(panelNote("no comparisons"))
	}
	return pl
}

// rowY is the height of row i of n: the first row on top.
func rowY(i, n int) float64 {
	return float64(n - 1 - i)
}

// xRange returns the x range of a panel: zero, the margin and every
// point and interval, with a little room on each side.
func xRange(p panel) (lo, hi float64) {
	lo, hi = 0, 0
	see := func(v *float64) {
		if v != nil {
			lo, hi = math.Min(lo, *v), math.Max(hi, *v)
		}
	}
	see(p.margin)
	for _, r := range p.rows {
		see(r.diff)
		see(r.lower)
		see(r.upper)
	}
	span := hi - lo
	if span == 0 {
		span = 2
		lo, hi = lo-1, hi+1
	}
	return lo - 0.08*span, hi + 0.08*span
}

// roundTicks marks the difference axis at round steps (1, 2 or 5 times
// a power of ten) that give four to ten labels, so that 0 is always one.
type roundTicks struct{}

func (roundTicks) Ticks(lo, hi float64) []plot.Tick {
	if !(hi > lo) || math.IsInf(hi-lo, 0) {
		return nil
	}
	step := math.Pow(10, math.Floor(math.Log10(hi-lo)))
	for _, f := range []float64{0.1, 0.2, 0.5, 1, 2, 5} {
		if (hi-lo)/(step*f) <= 10 {
			step *= f
			break
		}
	}
	decimals := max(0, -int(math.Floor(math.Log10(step)+1e-9)))
	var ticks []plot.Tick
	for k := math.Ceil(lo / step); k*step <= hi; k++ {
		v := k * step
		if v == 0 {
			v = 0 // not -0
		}
		ticks = append(ticks, plot.Tick{Value: v, Label: strconv.FormatFloat(v, 'f', decimals, 64)})
		// A minor tick halfway to the next label.
		if mid := v + step/2; mid <= hi {
			ticks = append(ticks, plot.Tick{Value: mid})
		}
	}
	return ticks
}

// vline is a vertical line across a panel's data area at x.
type vline struct {
	x     float64
	style draw.LineStyle
}

func (l vline) Plot(c draw.Canvas, p *plot.Plot) {
	trX, _ := p.Transforms(&c)
	x := trX(l.x)
	c.StrokeLine2(l.style, x, c.Min.Y, x, c.Max.Y)
}

// rowMarks draws each row's interval as a bar with end caps and its
// difference as a point.
type rowMarks []rowData

func (rows rowMarks) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	bar := draw.LineStyle{Color: ink, Width: vg.Points(1.6)}
	point := draw.GlyphStyle{Color: ink, Radius: vg.Points(4), Shape: draw.CircleGlyph{}}
	capHalf := vg.Points(5)
	for i, r := range rows {
		y := trY(rowY(i, len(rows)))
		if r.lower != nil {
			lo, hi := trX(*r.lower), trX(*r.upper)
			c.StrokeLine2(bar, lo, y, hi, y)
			c.StrokeLine2(bar, lo, y-capHalf, lo, y+capHalf)
			c.StrokeLine2(bar, hi, y-capHalf, hi, y+capHalf)
		}
		if r.diff != nil {
			c.DrawGlyph(point, vg.Point{X: trX(*r.diff), Y: y})
		}
	}
}

// panelNote writes a note in the middle of a panel's data area.
type panelNote string

func (n panelNote) Plot(c draw.Canvas, _ *plot.Plot) {
	c.FillText(textStyle(9, draw.XCenter, draw.YCenter), c.Center(), string(n))
}
