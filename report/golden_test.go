package report

import (
	"bytes"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/armtally/armtally/experiment"
)

// TestMain registers -update, which rewrites the golden files in testdata
// instead of comparing with them: go test ./report -update
func TestMain(m *testing.M) {
	flag.Bool("update", false, "rewrite the golden files in testdata")
	flag.Parse()
	os.Exit(m.Run())
}

func updating() bool {
	f := flag.Lookup("update")
	return f != nil && f.Value.String() == "true"
}

// goldenCase is one set of readouts rendered to name.golden.md and
// name.golden.json.
type goldenCase struct {
	name     string
	readouts []experiment.Readout
	opts     MarkdownOptions
}

func goldenCases() []goldenCase {
	return []goldenCase{
		{name: "two_arm", readouts: []experiment.Readout{twoArmReadout()}},
		{name: "three_arm", readouts: []experiment.Readout{threeArmReadout()}},
		{name: "guardrails", readouts: []experiment.Readout{guardrailReadout()}},
		{name: "one_sided", readouts: []experiment.Readout{oneSidedReadout()}},
		{
			name:     "batch",
			readouts: []experiment.Readout{twoArmReadout(), emptyReadout()},
			opts:     MarkdownOptions{HeadingLevel: 2, OmitCautions: true},
		},
	}
}

func TestGolden(t *testing.T) {
	for _, tc := range goldenCases() {
		t.Run(tc.name+"/markdown", func(t *testing.T) {
			got := render(t, func(b *bytes.Buffer) error { return WriteMarkdown(b, tc.readouts, tc.opts) })
			checkGolden(t, filepath.Join("testdata", tc.name+".golden.md"), got)
		})
		t.Run(tc.name+"/json", func(t *testing.T) {
			got := render(t, func(b *bytes.Buffer) error { return WriteJSON(b, tc.readouts) })
			checkGolden(t, filepath.Join("testdata", tc.name+".golden.json"), got)
		})
	}
}

// render runs write twice on fresh buffers and fails unless both runs give
// the same bytes.
func render(t *testing.T, write func(*bytes.Buffer) error) []byte {
	t.Helper()
	var first, second bytes.Buffer
	if err := write(&first); err != nil {
		t.Fatal(err)
	}
	if err := write(&second); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(first.Bytes(), second.Bytes()) {
		t.Fatalf("two runs differ:\n%s", diff("first", "second", first.Bytes(), second.Bytes()))
	}
	return first.Bytes()
}

// checkGolden compares got with the file at path, or rewrites the file
// under -update.
func checkGolden(t *testing.T, path string, got []byte) {
	t.Helper()
	if updating() {
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test -update to create it)", err)
	}
	if !bytes.Equal(got, want) {
		t.Errorf("output differs from %s (run go test -update to accept):\n%s", path, diff(path, "got", want, got))
	}
}

// diff returns a unified diff of two texts by line, with three lines of
// context around each change.
func diff(nameA, nameB string, a, b []byte) string {
	x := strings.SplitAfter(string(a), "\n")
	y := strings.SplitAfter(string(b), "\n")
	x = dropEmptyLast(x)
	y = dropEmptyLast(y)
	// lcs[i][j] is the length of the longest common subsequence of x[i:]
	// and y[j:].
	lcs := make([][]int, len(x)+1)
	for i := range lcs {
		lcs[i] = make([]int, len(y)+1)
	}
	for i := len(x) - 1; i >= 0; i-- {
		for j := len(y) - 1; j >= 0; j-- {
			if x[i] == y[j] {
				lcs[i][j] = lcs[i+1][j+1] + 1
			} else {
				lcs[i][j] = max(lcs[i+1][j], lcs[i][j+1])
			}
		}
	}
	type op struct {
		kind byte
		text string
	}
	var ops []op
	i, j := 0, 0
	for i < len(x) || j < len(y) {
		switch {
		case i < len(x) && j < len(y) && x[i] == y[j]:
			ops = append(ops, op{' ', x[i]})
			i++
			j++
		case i < len(x) && (j == len(y) || lcs[i+1][j] >= lcs[i][j+1]):
			ops = append(ops, op{'-', x[i]})
			i++
		default:
			ops = append(ops, op{'+', y[j]})
			j++
		}
	}
	const context = 3
	var out strings.Builder
	fmt.Fprintf(&out, "--- %s\n+++ %s\n", nameA, nameB)
	for k := 0; k < len(ops); {
		if ops[k].kind == ' ' {
			k++
			continue
		}
		start := max(k-context, 0)
		end := k
		for end < len(ops) {
			if ops[end].kind != ' ' {
				end++
				continue
			}
			// Stop when the next change is more than two contexts away.
			next := end
			for next < len(ops) && ops[next].kind == ' ' {
				next++
			}
			if next == len(ops) || next-end > 2*context {
				end = min(end+context, len(ops))
				break
			}
			end = next
		}
		out.WriteString("@@\n")
		for _, o := range ops[start:end] {
			out.WriteByte(o.kind)
			out.WriteString(strings.TrimSuffix(o.text, "\n"))
			out.WriteByte('\n')
		}
		k = end
	}
	return out.String()
}

// dropEmptyLast drops the "" that strings.SplitAfter leaves after a final
// newline.
func dropEmptyLast(lines []string) []string {
	if n := len(lines); n > 0 && lines[n-1] == "" {
		return lines[:n-1]
	}
	return lines
}

func TestDiff(t *testing.T) {
	tests := []struct {
		name string
		a, b string
		want string
	}{
		{
			name: "one line changed",
			a:    "a\nb\nc\n",
			b:    "a\nB\nc\n",
			want: "--- x\n+++ y\n@@\n a\n-b\n+B\n c\n",
		},
		{
			name: "line added at the end",
			a:    "a\n",
			b:    "a\nb\n",
			want: "--- x\n+++ y\n@@\n a\n+b\n",
		},
		{
			name: "unterminated last line",
			a:    "a\nb",
			b:    "a\nc",
			want: "--- x\n+++ y\n@@\n a\n-b\n+c\n",
		},
		{
			name: "far apart changes make two hunks",
			a:    "1\n2\n3\n4\n5\n6\n7\n8\n9\n10\n",
			b:    "one\n2\n3\n4\n5\n6\n7\n8\n9\nten\n",
			want: "--- x\n+++ y\n@@\n-1\n+one\n 2\n 3\n 4\n@@\n 7\n 8\n 9\n-10\n+ten\n",
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := diff("x", "y", []byte(tc.a), []byte(tc.b)); got != tc.want {
				t.Errorf("diff:\n%q\nwant\n%q", got, tc.want)
			}
		})
	}
}
