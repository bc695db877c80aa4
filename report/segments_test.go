package report

import (
	"bytes"
	"strings"
	"testing"

	"github.com/armtally/armtally/experiment"
)

// TestSchemaRejectsBrokenSegments breaks one segment or input field at a
// time in the two-arm document, which the schema must then reject.
func TestSchemaRejectsBrokenSegments(t *testing.T) {
	sch := compileSchema(t)
	var buf bytes.Buffer
	if err := WriteJSON(&buf, []experiment.Readout{twoArmReadout()}); err != nil {
		t.Fatal(err)
	}
	good := buf.Bytes()
	if err := sch.Validate(decode(t, good)); err != nil {
		t.Fatalf("the unbroken document fails: %v", err)
	}
	readout := func(doc any) map[string]any {
		return doc.(map[string]any)["readouts"].([]any)[0].(map[string]any)
	}
	segment := func(doc any, i int) map[string]any {
		m := readout(doc)["metrics"].([]any)[0].(map[string]any)
		return m["segments"].([]any)[i].(map[string]any)
	}
	tests := []struct {
		name  string
		spoil func(doc any)
	}{
		{"not exploratory", func(doc any) { segment(doc, 0)["exploratory"] = false }},
		{"value a number", func(doc any) { segment(doc, 0)["value"] = 3.0 }},
		{"empty dimension", func(doc any) { segment(doc, 0)["dimension"] = "" }},
		{"segment without comparisons", func(doc any) { delete(segment(doc, 0), "comparisons") }},
		{"metric without segments", func(doc any) { delete(readout(doc)["metrics"].([]any)[1].(map[string]any), "segments") }},
		{"missing segmentation", func(doc any) { delete(readout(doc), "segmentation") }},
		{"negative segment tests", func(doc any) { readout(doc)["segmentation"].(map[string]any)["tests"] = -1.0 }},
		{"unknown input", func(doc any) { readout(doc)["diagnostics"].(map[string]any)["input"] = "spreadsheet" }},
		{"missing input", func(doc any) { delete(readout(doc)["diagnostics"].(map[string]any), "input") }},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			doc := decode(t, good)
			tc.spoil(doc)
			if err := sch.Validate(doc); err == nil {
				t.Error("broken document passes the schema")
			}
		})
	}
}

// TestSegmentTable checks the rows of the segment table of the two-arm
// fixture: the null value printed plain, the control's comparison cells
// empty, an arm without units, and Fisher's exact test named where it
// decides. The numbers are the fixture's (fixtures.R) as the formatters
// print them.
func TestSegmentTable(t *testing.T) {
	out := render1(t, twoArmReadout())
	for _, want := range []string{
		"| `device` = `desktop` | `control` (control) | 5,590 | 618 | 11.06% (10.26% to 11.90%) |  |  |  |  |",
		"| `device` = `desktop` | `green-button` | 5,500 | 700 | 12.73% (11.87% to 13.63%) | +1.67 pp (+0.47 to +2.88) | +15.12% (+4.00% to +27.43%) | z = 2.72, p = 0.0065 | significant (unadjusted) |",
		"| `device` = `tablet` | `green-button` | 0 | 0 | n/a (no units) | n/a | n/a | n/a (an arm has no units) | no test |",
		"| `device` = (null) | `green-button` | 8 | 2 | 25.00% (7.15% to 59.07%) | 0.00 pp (-33.40 to +37.69) | 0.00% (-78.76% to +370.91%) | Fisher's exact test (too few conversions or non-conversions for z), p = 1.0000 | not significant |",
		"- Segment results are exploratory: 6 segment comparisons, each at alpha 0.05 without adjustment",
	} {
		if !strings.Contains(out, want+"\n") && !strings.Contains(out, want) {
			t.Errorf("missing line %q", want)
		}
	}
	// The segment section follows the metric's conclusion.
	if c, s := strings.Index(out, "**Conclusion:**"), strings.Index(out, "By segment (exploratory)"); c < 0 || s < c {
		t.Errorf("segment section at %d, conclusion at %d", s, c)
	}
	// A literal value "(null)" is a code span, the null value is not.
	r := twoArmReadout()
	v := experiment.NullSegmentText
	r.Metrics[0].Segments[0].Value = &v
	if out := render1(t, r); !strings.Contains(out, "| `device` = `(null)` |") {
		t.Error("a value spelled (null) is not printed as code")
	}
	// Without segments there is no section and no caution.
	r = twoArmReadout()
	r.Segmentation = experiment.Segmentation{}
	for i := range r.Metrics {
		r.Metrics[i].Segments = nil
	}
	if out := render1(t, r); strings.Contains(out, "segment") || strings.Contains(out, "Segment") {
		t.Error("a readout without segments mentions them")
	}
}

// TestDiagnosticsByInput checks the freshness line and the event-only
// counters for each input shape.
func TestDiagnosticsByInput(t *testing.T) {
	cases := []struct {
		input, fresh, multi string
	}{
		{"event_log", "- Data freshness: no valid rows were read", "| Multi-arm units (policy exclude) | 0 |"},
		{"unit_table", "- Data freshness: not known (a unit table carries no conversion times)", "| Multi-arm units (policy exclude) | 0 |"},
		{"counts", "- Data freshness: not known (counts carry no times)", "| Multi-arm units (policy exclude) | n/a (not in counts) |"},
	}
	for _, tc := range cases {
		r := emptyReadout()
		r.Diagnostics.Input = tc.input
		out := render1(t, r)
		for _, want := range []string{tc.fresh, tc.multi, "| Input | " + inputName(tc.input) + " |"} {
			if !strings.Contains(out, want) {
				t.Errorf("%s: missing %q", tc.input, want)
			}
		}
	}
}
