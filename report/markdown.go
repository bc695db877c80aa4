package report

import (
	"bytes"
	"fmt"
	"io"
	"strings"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/ingest/safetext"
)

// MarkdownOptions shapes the Markdown readout. The zero value gives the
// full readout with each experiment under a level-1 heading.
type MarkdownOptions struct {
	// HeadingLevel is the heading level of each readout, 1 to 4; its
	// sections are one and two levels deeper. 0 means 1. Use 2 or 3 to
	// paste the readout under a ticket's own headings.
	HeadingLevel int
	// OmitCautions leaves out the "Before acting" list of cautions.
	OmitCautions bool
	// Brief writes the compact form for a ticket comment: each readout's
	// title, summary, warnings and cautions, without the detail.
	Brief bool
	// ChartPath, when set, is the chart file (report/chart) linked above
	// the metric sections, as a path relative to the Markdown file's
	// folder; with several readouts, each links its own file,
	// PerExperimentPath(ChartPath, experiment, number of readouts).
	ChartPath string
	// LooksChartPath, when set, is the chart over the looks of a
	// monitored run (report/chart.WriteLooks), linked from the
	// Monitoring section like ChartPath.
	LooksChartPath string
}

// WriteMarkdown writes readouts to w as a Markdown readout for an
// experiment ticket, one section per readout in the order given: title,
// summary (the overall decision, one row per treatment and metric, the
// top cautions), header, warnings, arms and sample ratio, one section per
// metric with its conclusion, cautions, and diagnostics. With
// opts.Brief, only the title, summary, warnings and cautions.
//
// Like WriteJSON, it returns an error, and writes nothing, when a value is
// NaN or infinite or an option is out of range. It does not check that the
// readouts are consistent (that a comparison names an arm of its metric,
// say); what is missing is printed as "n/a".
func WriteMarkdown(w io.Writer, readouts []experiment.Readout, opts MarkdownOptions) error {
	level := opts.HeadingLevel
	if level == 0 {
		level = 1
	}
	if level < 1 || level > 4 {
		return fmt.Errorf("markdown heading level %d out of range (want 1 to 4)", opts.HeadingLevel)
	}
	if err := checkFinite(NewDocument(readouts)); err != nil {
		return err
	}
	md := &markdown{level: level, opts: opts, readouts: len(readouts)}
	for i, r := range readouts {
		if i > 0 {
			md.line("---")
			md.line("")
		}
		md.readout(r)
	}
	_, err := w.Write(bytes.TrimRight(md.buf.Bytes(), "\n"))
	if err == nil {
		_, err = io.WriteString(w, "\n")
	}
	return err
}

// markdown accumulates the readout text.
type markdown struct {
	buf   bytes.Buffer
	level int
	opts  MarkdownOptions
	// readouts is the number of readouts written (for chartLink).
	readouts int
}

// line writes one line. Every line of the readout passes here, so this is
// where text from the data is made safe: control characters, bidi
// controls and bytes that are not UTF-8 become visible escapes
// (safetext.Visible; the readout's own text has none, so it is unchanged).
// Table cells and code spans are escaped before (tableRow, code).
func (md *markdown) line(s string) {
	md.buf.WriteString(safetext.Visible(s))
	md.buf.WriteByte('\n')
}

// heading writes a heading depth levels below the readout's own.
func (md *markdown) heading(depth int, text string) {
	md.line(strings.Repeat("#", md.level+depth) + " " + text)
	md.line("")
}

// para writes one paragraph.
func (md *markdown) para(text string) {
	for _, s := range sentenceLines(text) {
		md.line(s)
	}
	md.line("")
}

// paraLine writes one paragraph on one line, however long: the summary's
// overall line and cautions, which a reader or a script takes as a line.
func (md *markdown) paraLine(text string) {
	md.line(text)
	md.line("")
}

// longParagraph is the length above which a paragraph is written one
// sentence a line, so that the readout's source stays readable in a
// terminal, a diff or a ticket's plain-text view.
const longParagraph = 160

// sentenceLines splits a long paragraph after each sentence: at ". " when
// what follows starts a sentence (a capital letter, a code span or bold
// text). Markdown joins the lines again into one paragraph, so the
// rendered readout is unchanged. A short paragraph stays one line.
func sentenceLines(text string) []string {
	if len(text) <= longParagraph {
		return []string{text}
	}
	var lines []string
	start := 0
	for i := 0; i+2 < len(text); i++ {
		if text[i] != '.' || text[i+1] != ' ' {
			continue
		}
		c := text[i+2]
		if c >= 'A' && c <= 'Z' || c == '`' || c == '*' && i+3 < len(text) && text[i+3] == '*' {
			lines = append(lines, text[start:i+1])
			start = i + 2
		}
	}
	return append(lines, text[start:])
}

// table writes a table; align holds 'l' or 'r' per column.
func (md *markdown) table(header []string, align string, rows [][]string) {
	md.line(tableRow(header))
	seps := make([]string, len(header))
	for i := range seps {
		seps[i] = ":--"
		if i < len(align) && align[i] == 'r' {
			seps[i] = "--:"
		}
	}
	md.line("|" + strings.Join(seps, "|") + "|")
	for _, r := range rows {
		md.line(tableRow(r))
	}
	md.line("")
}

func tableRow(cells []string) string {
	esc := make([]string, len(cells))
	for i, c := range cells {
		esc[i] = strings.ReplaceAll(oneLine(c), "|", `\|`)
	}
	return "| " + strings.Join(esc, " | ") + " |"
}

// oneLine folds line breaks into spaces.
func oneLine(s string) string {
	return strings.Join(strings.Fields(strings.ReplaceAll(s, "\r", " ")), " ")
}

// code writes a name as a code span.
func code(s string) string {
	if s == "" {
		return "(empty)"
	}
	s = oneLine(s)
	fence := "`"
	for strings.Contains(s, fence) {
		fence += "`"
	}
	if strings.HasPrefix(s, "`") || strings.HasSuffix(s, "`") {
		return fence + " " + s + " " + fence
	}
	return fence + s + fence
}

// notes numbers the warnings of one metric section: each distinct text gets
// the next number when first seen and is printed once, under the table
// where it first arose.
type notes struct {
	list    []string
	number  map[string]int
	printed int
}

func newNotes() *notes {
	return &notes{number: make(map[string]int)}
}

// add records texts and returns their numbers as "[1], [2]", or "none".
func (n *notes) add(texts ...string) string {
	var refs []string
	seen := make(map[int]bool)
	for _, t := range texts {
		t = oneLine(t)
		if t == "" {
			continue
		}
		k, ok := n.number[t]
		if !ok {
			n.list = append(n.list, t)
			k = len(n.list)
			n.number[t] = k
		}
		if !seen[k] {
			seen[k] = true
			refs = append(refs, fmt.Sprintf("[%d]", k))
		}
	}
	if len(refs) == 0 {
		return "none"
	}
	return strings.Join(refs, ", ")
}

// addTest records the notes of a test: that its two routes disagree, if
// they do, then its warnings; it returns their numbers as add does.
func (n *notes) addTest(z *experiment.Test, warnings []experiment.Warning) string {
	var texts []string
	if z != nil && z.RejectByStatistic != z.RejectByPValue {
		texts = append(texts, routesDisagree)
	}
	return n.add(append(texts, warningTexts(warnings)...)...)
}

// flush prints the notes not printed yet as an ordered list that starts
// at the first new number.
func (n *notes) flush(md *markdown) {
	if n.printed == len(n.list) {
		return
	}
	for i := n.printed; i < len(n.list); i++ {
		md.line(fmt.Sprintf("%d. %s", i+1, n.list[i]))
	}
	n.printed = len(n.list)
	md.line("")
}

// detailRow is one row of a detail table: its label, one cell per column
// and, when fold is set, the sentence that replaces the row when every
// cell reads the same (and, if usual is not "", reads usual).
type detailRow struct {
	label string
	cells []string
	usual string
	fold  func(common string) string
}

// detailTable writes a detail table whose columns are named by header
// (after the empty corner cell), then one line with the sentences of the
// folded rows.
func (md *markdown) detailTable(header []string, rows []detailRow) {
	var kept [][]string
	var folded []string
	for _, r := range rows {
		if r.fold != nil && sameCells(r.cells, r.usual) {
			if text := r.fold(r.cells[0]); text != "" {
				folded = append(folded, text)
			}
			continue
		}
		kept = append(kept, append([]string{r.label}, r.cells...))
	}
	md.table(append([]string{""}, header...), "", kept)
	if len(folded) > 0 {
		md.para(strings.Join(folded, " "))
	}
}

// sameCells reports whether every cell equals the first and, when usual
// is not "", equals usual.
func sameCells(cells []string, usual string) bool {
	if len(cells) == 0 {
		return false
	}
	for _, c := range cells {
		if c != cells[0] || (usual != "" && c != usual) {
			return false
		}
	}
	return true
}

// sentence makes a folded row's sentence from a fixed text.
func sentence(text string) func(string) string {
	return func(string) string { return text }
}
