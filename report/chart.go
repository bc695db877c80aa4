// The Markdown side of the chart (package report/chart draws it): the
// link to it, and the naming of one experiment's file in a run of
// several.

package report

import (
	"fmt"
	"path/filepath"
	"strings"

	"github.com/armtally/armtally/experiment"
)

// FormatPoints writes a difference of rates in percentage points as the
// readout does (0.0152 is "+1.52"), for package report/chart.
func FormatPoints(d float64) string { return formatPoints(d) }

// FormatLevel writes a confidence level as the readout does (0.975 is
// "97.5%"), for package report/chart.
func FormatLevel(level float64) string { return formatLevel(level) }

// PerExperimentPath returns the file of one experiment's output (the
// audit table, the chart) of a run of several: path itself for a run of
// one experiment, else path with "-KEY" before its extension (characters
// other than letters, digits, '.', '_' and '-' in the key become '_').
func PerExperimentPath(path, key string, experiments int) string {
	if experiments == 1 {
		return path
	}
	safe := strings.Map(func(r rune) rune {
		switch {
		case r >= 'a' && r <= 'z', r >= 'A' && r <= 'Z', r >= '0' && r <= '9', r == '.', r == '_', r == '-':
			return r
		}
		return '_'
	}, key)
	ext := filepath.Ext(path)
	return strings.TrimSuffix(path, ext) + "-" + safe + ext
}

// chartLink writes the line that links the readout's chart, when
// MarkdownOptions.ChartPath names one: a link relative to the Markdown
// file, each byte other than a letter, digit, '-', '.', '_', '~' or '/'
// percent-encoded so that no path can end the link or read as a scheme.
func (md *markdown) chartLink(r experiment.Readout) {
	md.fileLink("Chart of each treatment's difference from the control with its interval, per metric", md.opts.ChartPath, r)
}

// fileLink writes a paragraph "caption: [name](path)" that links the
// readout's file at chartPath (PerExperimentPath of it), when set.
func (md *markdown) fileLink(caption, chartPath string, r experiment.Readout) {
	if chartPath == "" {
		return
	}
	path := filepath.ToSlash(PerExperimentPath(chartPath, r.Experiment, md.readouts))
	var b strings.Builder
	for i := 0; i < len(path); i++ {
		switch c := path[i]; {
		case c >= 'a' && c <= 'z', c >= 'A' && c <= 'Z', c >= '0' && c <= '9', strings.IndexByte("-._~/", c) >= 0:
			b.WriteByte(c)
		default:
			fmt.Fprintf(&b, "%%%02X", c)
		}
	}
	name := path
	if i := strings.LastIndexByte(path, '/'); i >= 0 {
		name = path[i+1:]
	}
	md.para(fmt.Sprintf("%s: [%s](%s)", caption,
		strings.NewReplacer(`\`, `\\`, "[", `\[`, "]", `\]`, "*", `\*`, "_", `\_`, "`", "\\`", "<", `\<`).Replace(name), b.String()))
}
