package main

import (
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// TestDemoAnswersFirst checks that the demo readout answers "ship, stop
// or wait, and why" in its first 20 lines: the overall line with the
// decision, and a summary row for each treatment on each of the demo's
// two metrics. The demo's decision itself is the analysis's (the
// experiment package's verdict tests); this test reads only where it is.
func TestDemoAnswersFirst(t *testing.T) {
	code, stdout, stderr := runCmd(t, "analyze", "--demo")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	head := strings.Join(strings.SplitN(stdout, "\n", 21)[:20], "\n")
	if !regexp.MustCompile(`(?m)^\*\*(Ship|Stop|Wait|Fix the data)[^*]*\*\* .*(primary metric|sample ratio)`).MatchString(head) {
		t.Errorf("no overall decision line in the first 20 lines:\n%s", head)
	}
	for _, m := range []string{"purchase", "newsletter_signup"} {
		for _, arm := range []string{"one-page", "saved-basket"} {
			row := regexp.MustCompile("(?m)^\\| `" + m + "` \\| primary \\| `" + arm + "` \\| [+-]?[0-9.]+ pp \\(95% CI [^|]*\\) \\| [^|]+ \\| [^|]+ \\| [a-z :]+ \\|$")
			if !row.MatchString(head) {
				t.Errorf("no summary row for %s on %s in the first 20 lines:\n%s", arm, m, head)
			}
		}
	}
}

// TestBriefFlag checks --brief: the compact readout is written next to
// the full one, starts with the same title and summary, and leaves the
// detail out.
func TestBriefFlag(t *testing.T) {
	dir := t.TempDir()
	full, brief := filepath.Join(dir, "readout.md"), filepath.Join(dir, "comment.md")
	code, stdout, stderr := runCmd(t, "analyze", "--demo", "--out", full, "--brief", brief)
	if code != exitOK || stdout != "" {
		t.Fatalf("exit %d, stdout %q, stderr %s", code, stdout, stderr)
	}
	f, b := fileContent(t, full), fileContent(t, brief)
	cut := func(s string) string {
		i := strings.Index(s, "**Cautions:**")
		if i < 0 {
			t.Fatalf("no cautions line in:\n%s", s)
		}
		return s[:i]
	}
	if cut(f) != cut(b) {
		t.Errorf("the brief's summary differs from the full readout's:\n%s\n---\n%s", cut(b), cut(f))
	}
	for _, not := range []string{"## Diagnostics", "### Against control", "## Arms"} {
		if strings.Contains(b, not) {
			t.Errorf("brief has %q", not)
		}
	}
	if !strings.Contains(b, "## Before acting") || !strings.Contains(b, "> **Warnings**") {
		t.Errorf("brief lacks the warnings or the cautions:\n%s", b)
	}
	if _, err := os.Stat(brief); err != nil {
		t.Fatal(err)
	}
}
