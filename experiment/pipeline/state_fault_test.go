//go:build unix

package pipeline

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// A state file cut short after it was mapped gives a reason to read every
// file, not a crash (common practice for memory-mapped input; the merge's
// reads are covered in package experiment).
func TestStateHeaderCutShort(t *testing.T) {
	path := filepath.Join(t.TempDir(), "tally.state")
	if err := os.WriteFile(path, make([]byte, 3*os.Getpagesize()), 0o644); err != nil {
		t.Fatal(err)
	}
	sf, why := openStateFile(path, true)
	if sf == nil {
		t.Fatalf("openStateFile: %s", why)
	}
	defer sf.close()
	if err := os.Truncate(path, 0); err != nil {
		t.Fatal(err)
	}
	if why := sf.checkedHeader("def"); !strings.Contains(why, errStateUnreadable.Error()) {
		t.Fatalf("reason %q, want one that says the file cannot be read", why)
	}
}
