package report

import (
	"bytes"
	"strings"
	"testing"

	"github.com/armtally/armtally/experiment"
)

func TestWriteMarkdownHeadingLevel(t *testing.T) {
	tests := []struct {
		level   int
		want    string // first line
		wantErr bool
	}{
		{level: 0, want: "# Experiment `checkout-button-color`"},
		{level: 1, want: "# Experiment `checkout-button-color`"},
		{level: 3, want: "### Experiment `checkout-button-color`"},
		{level: 4, want: "#### Experiment `checkout-button-color`"},
		{level: 5, wantErr: true},
		{level: -1, wantErr: true},
	}
	for _, tc := range tests {
		t.Run(strings.Repeat("#", max(tc.level, 0)), func(t *testing.T) {
			var buf bytes.Buffer
			err := WriteMarkdown(&buf, []experiment.Readout{twoArmReadout()}, MarkdownOptions{HeadingLevel: tc.level})
			if tc.wantErr {
				if err == nil || buf.Len() != 0 {
					t.Errorf("err %v, %d bytes written; want an error and nothing written", err, buf.Len())
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			first, _, _ := strings.Cut(buf.String(), "\n")
			if first != tc.want {
				t.Errorf("first line %q, want %q", first, tc.want)
			}
		})
	}
}

// TestMarkdownWarningBlock checks when the block of warnings appears and
// what it holds; the golden files show the wording in full.
func TestMarkdownWarningBlock(t *testing.T) {
	tests := []struct {
		name    string
		readout func() experiment.Readout
		want    []string // substrings of the block, in order
		absent  bool
	}{
		{
			name: "nothing to warn about",
			readout: func() experiment.Readout {
				r := twoArmReadout()
				r.Diagnostics.Immature[0].Units = 0
				return r
			},
			absent: true,
		},
		{
			name:    "immature units",
			readout: twoArmReadout,
			want:    []string{"> 1. `purchase`: 400 units were left out"},
		},
		{
			name:    "everything",
			readout: threeArmReadout,
			want: []string{
				"> 1. **Sample ratio mismatch**",
				"> 2. 41 units were exposed to more than one arm",
				"> 3. 3 units were first exposed to two arms at the same instant",
				"> 4. `activated`: 57 units were counted before",
				"> 5. `plan_upgrade`: normal approximation not justified for `short-tour` vs `control`, `long-tour` vs `control`; decided by Fisher's exact test.",
				"> 6. `plan_upgrade`: normal approximation not justified for `control` vs target 0.20%, `short-tour` vs target 0.20%, `long-tour` vs target 0.20%; decided by the exact binomial test.",
				"> 7. `plan_upgrade`, `long-tour` vs `control`: the test is significant but the 95% interval",
				"> 8. the analysis window has no end",
			},
		},
		{
			name: "readout warning repeated",
			readout: func() experiment.Readout {
				r := twoArmReadout()
				r.Warnings = []string{"check the exposure logging", "check the exposure\nlogging", "check the exposure logging"}
				return r
			},
			want: []string{"> 1. `purchase`", "> 2. check the exposure logging\n"},
			// and no third item: the block ends after the second
		},
		{
			name: "routes disagree",
			readout: func() experiment.Readout {
				r := twoArmReadout()
				r.Metrics[1].Comparisons[0].Z.RejectByPValue = true
				return r
			},
			want: []string{"`signup`, `green-button` vs `control`: the statistic and the p-value routes of the z test disagree"},
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var buf bytes.Buffer
			if err := WriteMarkdown(&buf, []experiment.Readout{tc.readout()}, MarkdownOptions{}); err != nil {
				t.Fatal(err)
			}
			out := buf.String()
			_, block, found := strings.Cut(out, "> **Warnings**\n>\n")
			if tc.absent {
				if found {
					t.Errorf("unexpected warning block:\n%s", out)
				}
				return
			}
			if !found {
				t.Fatalf("no warning block:\n%s", out)
			}
			block, _, _ = strings.Cut(block, "\n## ")
			rest := block
			for _, w := range tc.want {
				i := strings.Index(rest, w)
				if i < 0 {
					t.Fatalf("block lacks %q (or has it out of order):\n%s", w, block)
				}
				rest = rest[i+len(w):]
			}
			if strings.HasPrefix(rest, ">") {
				t.Errorf("block has more items than expected:\n%s", block)
			}
		})
	}
}

func TestNotes(t *testing.T) {
	n := newNotes()
	steps := []struct {
		add  []string
		want string
	}{
		{nil, "none"},
		{[]string{"a"}, "[1]"},
		{[]string{"b", "a", "b"}, "[2], [1]"},
		{[]string{"", "c"}, "[3]"},
		{[]string{"a\nlong   one"}, "[4]"},
		{[]string{"a long one"}, "[4]"},
	}
	for _, s := range steps {
		if got := n.add(s.add...); got != s.want {
			t.Errorf("add(%q) = %q, want %q", s.add, got, s.want)
		}
	}
	var md markdown
	n.flush(&md)
	n.add("d", "a")
	n.flush(&md)
	n.flush(&md)
	want := "1. a\n2. b\n3. c\n4. a long one\n\n5. d\n\n"
	if got := md.buf.String(); got != want {
		t.Errorf("flushed %q, want %q", got, want)
	}
}

func TestTableEscapesPipes(t *testing.T) {
	r := twoArmReadout()
	r.Arms[1].Name = "green|button"
	var buf bytes.Buffer
	if err := WriteMarkdown(&buf, []experiment.Readout{r}, MarkdownOptions{}); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(buf.String(), "| `green\\|button` | 9,988 |") {
		t.Errorf("pipe in an arm name not escaped:\n%s", buf.String())
	}
}

func TestOmitCautions(t *testing.T) {
	for _, omit := range []bool{false, true} {
		var buf bytes.Buffer
		if err := WriteMarkdown(&buf, []experiment.Readout{twoArmReadout()}, MarkdownOptions{OmitCautions: omit}); err != nil {
			t.Fatal(err)
		}
		has := strings.Contains(buf.String(), "## Before acting\n")
		if has == omit {
			t.Errorf("OmitCautions %v: cautions present %v", omit, has)
		}
	}
}
