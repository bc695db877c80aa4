package report

import (
	"bytes"
	"encoding/json"
	"reflect"
	"strings"
	"testing"
	"unicode/utf8"

	"github.com/armtally/armtally/experiment"
)

// renamed returns r with every string field (at any depth: arm names,
// comparison arms, metric and event names, segment dimensions and values,
// warning arms, the experiment key) that equals a key of names replaced by
// its value.
func renamed(r experiment.Readout, names map[string]string) experiment.Readout {
	renameValue(reflect.ValueOf(&r).Elem(), names)
	return r
}

func renameValue(v reflect.Value, names map[string]string) {
	switch v.Kind() {
	case reflect.String:
		if n, ok := names[v.String()]; ok && v.CanSet() {
			v.SetString(n)
		}
	case reflect.Pointer:
		if !v.IsNil() {
			renameValue(v.Elem(), names)
		}
	case reflect.Slice:
		for i := range v.Len() {
			renameValue(v.Index(i), names)
		}
	case reflect.Struct:
		for i := range v.NumField() {
			if v.Type().Field(i).IsExported() {
				renameValue(v.Field(i), names)
			}
		}
	}
}

// checkMarkdownSafe fails unless md is valid UTF-8 without control
// characters other than newline (nor C1 controls or bidirectional
// overrides and isolates), and every table row has as many cells as its
// header.
func checkMarkdownSafe(t *testing.T, md string) {
	t.Helper()
	if !utf8.ValidString(md) {
		t.Fatalf("Markdown is not valid UTF-8:\n%q", md)
	}
	for i, r := range md {
		if r == '\n' {
			continue
		}
		if r < 0x20 || r == 0x7f || (r >= 0x80 && r <= 0x9f) || (r >= 0x202a && r <= 0x202e) || (r >= 0x2066 && r <= 0x2069) {
			t.Fatalf("Markdown holds %U at byte %d:\n%q", r, i, md)
		}
	}
	checkTables(t, md)
}

// checkTables finds each table (a row followed by a delimiter row) and
// checks that every following line up to the blank line that ends it is
// a row with the header's number of cells. Cells are counted as the pipes
// not escaped by a backslash, less one (GitHub Flavored Markdown, "Tables
// (extension)"; common practice).
func checkTables(t *testing.T, md string) {
	t.Helper()
	lines := strings.Split(md, "\n")
	tables := 0
	for i := 0; i+1 < len(lines); i++ {
		if !strings.HasPrefix(lines[i], "|") || !(strings.HasPrefix(lines[i+1], "|:--") || strings.HasPrefix(lines[i+1], "|--:")) {
			continue
		}
		tables++
		want := cells(lines[i])
		if got := cells(lines[i+1]); got != want {
			t.Fatalf("delimiter row has %d cells, header %d:\n%s\n%s", got, want, lines[i], lines[i+1])
		}
		j := i + 2
		for ; j < len(lines) && lines[j] != ""; j++ {
			if !strings.HasPrefix(lines[j], "| ") || !strings.HasSuffix(lines[j], " |") {
				t.Fatalf("line %d breaks the table that starts at line %d: %q", j+1, i+1, lines[j])
			}
			if got := cells(lines[j]); got != want {
				t.Fatalf("line %d has %d cells, its header %d:\n%s\n%s", j+1, got, want, lines[i], lines[j])
			}
		}
		i = j
	}
	if tables == 0 {
		t.Fatalf("no table found in:\n%s", md)
	}
}

// cells counts the cells of a table row.
func cells(row string) int {
	n := 0
	for i := 0; i < len(row); i++ {
		if row[i] == '|' && (i == 0 || row[i-1] != '\\') {
			n++
		}
	}
	return n - 1
}

// hostile names one of each kind the readout must defuse: terminal
// escapes, a bell, NUL, a right-to-left override, bytes that are not
// UTF-8, table and code-span breakers.
var hostile = map[string]string{
	"control":               "ctl\x1b[2J\x1b]0;owned\x07",
	"green-button":          "tr\xe9at\x00\u202eevil",
	"purchase":              "buy|now`\n| x |",
	"signup":                "sign\u009bup\u2066",
	"device":                "dev\rice\x7f",
	"desktop":               "desk\ttop\xff",
	"mobile":                "``mob|le``",
	"checkout-button-color": "exp\x1b[31m",
}

func TestMarkdownHostileNames(t *testing.T) {
	for _, tc := range []struct {
		name string
		r    experiment.Readout
	}{
		{"two arms", twoArmReadout()},
		{"three arms", threeArmReadout()},
		{"guardrail", guardrailReadout()},
	} {
		t.Run(tc.name, func(t *testing.T) {
			out := render1(t, renamed(tc.r, hostile))
			checkMarkdownSafe(t, out)
		})
	}
	out := render1(t, renamed(twoArmReadout(), hostile))
	// The escapes are visible: the forms of internal/safetext.Visible.
	for _, want := range []string{
		"`ctl\\x1b[2J\\x1b]0;owned\\x07` (control)",
		"`tr\\xe9at\\x00\\u202eevil`",
		"`sign\\u009bup\\u2066`",
		"`desk top\\xff`",
		"`exp\\x1b[31m`",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("Markdown lacks %s:\n%s", want, out)
		}
	}
}

// TestJSONKeepsNamesApart checks that two arms whose names differ only in
// a byte that is not UTF-8 stay different in the JSON, written by the rule
// of internal/safetext.Exact.
func TestJSONKeepsNamesApart(t *testing.T) {
	r := renamed(twoArmReadout(), map[string]string{"control": "tr\xe8at", "green-button": "tr\xe9at"})
	var buf bytes.Buffer
	if err := WriteJSON(&buf, []experiment.Readout{r}); err != nil {
		t.Fatal(err)
	}
	if !utf8.Valid(buf.Bytes()) {
		t.Fatal("JSON is not valid UTF-8")
	}
	var doc Document
	if err := json.Unmarshal(buf.Bytes(), &doc); err != nil {
		t.Fatal(err)
	}
	ro := doc.Readouts[0]
	if got, want := ro.Arms[0].Arm, `tr\xe8at`; got != want {
		t.Errorf("arm 0 is %q, want %q", got, want)
	}
	if got, want := ro.Arms[1].Arm, `tr\xe9at`; got != want {
		t.Errorf("arm 1 is %q, want %q", got, want)
	}
	c := ro.Metrics[0].Comparisons[0]
	if c.Treatment == c.Control || ro.Control != c.Control {
		t.Errorf("comparison %q vs %q, control %q: names collide or differ from the arms", c.Treatment, c.Control, ro.Control)
	}
	// A valid name spelled like the escape stays apart from both.
	r = renamed(twoArmReadout(), map[string]string{"control": `tr\xe9at`, "green-button": "tr\xe9at"})
	doc = NewDocument([]experiment.Readout{r})
	if a, b := doc.Readouts[0].Arms[0].Arm, doc.Readouts[0].Arms[1].Arm; a == b {
		t.Errorf("the text %q and the bytes %q both became %q", `tr\xe9at`, "tr\xe9at", a)
	}
}

// FuzzMarkdownNames renders the two-arm readout (and its segment table)
// with arbitrary names for the experiment, both arms, a metric, the
// segment dimension and a segment value, and checks that the Markdown is
// valid UTF-8, holds no control character but newline, and keeps every
// table row at its header's number of cells.
func FuzzMarkdownNames(f *testing.F) {
	f.Add("exp\x1b[31m", "ctl\x07", "tr\xe9at\x00\u202e", "buy|now`", "dev\nice", "``mob|le``")
	f.Add("", " ", "\\", "|", "`", "\\|")
	f.Add("a\u2066b", "\u0085", "\xff\xfe", "\r\n", "x\\", "| --- |")
	f.Fuzz(func(t *testing.T, experimentKey, control, treatment, metric, dimension, value string) {
		r := renamed(twoArmReadout(), map[string]string{
			"checkout-button-color": experimentKey,
			"control":               control,
			"green-button":          treatment,
			"purchase":              metric,
			"device":                dimension,
			"desktop":               value,
		})
		var buf bytes.Buffer
		if err := WriteMarkdown(&buf, []experiment.Readout{r}, MarkdownOptions{}); err != nil {
			t.Fatal(err)
		}
		checkMarkdownSafe(t, buf.String())
	})
}
