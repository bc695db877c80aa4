package ingest

import (
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"testing"

	"github.com/apache/arrow-go/v18/arrow"
)

// spillTestSchema is the smallest event table a Spill takes.
func spillTestSchema() *arrow.Schema {
	return arrow.NewSchema([]arrow.Field{
		{Name: "user", Type: arrow.BinaryTypes.String, Nullable: true},
		{Name: "ts", Type: &arrow.TimestampType{Unit: arrow.Microsecond, TimeZone: "UTC"}, Nullable: true},
		{Name: "event", Type: arrow.BinaryTypes.String, Nullable: true},
	}, nil)
}

// deadPid returns the id of a process that has exited: a child that ran
// and was waited for. Linux hands ids out in increasing order, so it is
// not reused within a test.
func deadPid(t *testing.T) int {
	t.Helper()
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	if err := cmd.Run(); err != nil {
		t.Fatal(err)
	}
	return cmd.Process.Pid
}

// RemoveStaleSpills removes the folders of processes that no longer run
// (an id with no process, or an id now held by a process that started at
// another time) and keeps those of running processes, those without a
// marker and anything not named as a spill folder.
func TestRemoveStaleSpills(t *testing.T) {
	if _, err := processStart(os.Getpid()); err != nil {
		t.Skipf("no /proc to tell which processes run: %v", err)
	}
	dir := t.TempDir()
	live, err := NewSpill(dir, 2, spillTestSchema())
	if err != nil {
		t.Fatal(err)
	}
	defer live.Close()
	ownStart, err := processStart(os.Getpid())
	if err != nil {
		t.Fatal(err)
	}
	folder := func(name, marker string) string {
		path := filepath.Join(dir, name)
		if err := os.Mkdir(path, 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(path, "part-0000.rows"), []byte("rows"), 0o644); err != nil {
			t.Fatal(err)
		}
		if marker != "" {
			if err := os.WriteFile(filepath.Join(path, spillMarker), []byte(marker), 0o644); err != nil {
				t.Fatal(err)
			}
		}
		return path
	}
	dead := folder(spillPrefix+"dead", fmt.Sprintf("pid %d\nstart 1\n", deadPid(t)))
	reused := folder(spillPrefix+"reused", fmt.Sprintf("pid %d\nstart %s0\n", os.Getpid(), ownStart))
	running := folder(spillPrefix+"running", fmt.Sprintf("pid %d\nstart %s\n", os.Getpid(), ownStart))
	noMarker := folder(spillPrefix+"nomarker", "")
	badMarker := folder(spillPrefix+"badmarker", "pid x\n")
	other := folder("other-folder", fmt.Sprintf("pid %d\nstart 1\n", deadPid(t)))

	removed, err := RemoveStaleSpills(dir)
	if err != nil {
		t.Fatal(err)
	}
	slices.Sort(removed)
	if want := []string{dead, reused}; !slices.Equal(removed, want) {
		t.Errorf("removed %q, want %q", removed, want)
	}
	for _, path := range []string{dead, reused} {
		if _, err := os.Stat(path); !os.IsNotExist(err) {
			t.Errorf("%s is still there (%v)", path, err)
		}
	}
	for _, path := range []string{live.Dir(), running, noMarker, badMarker, other} {
		if _, err := os.Stat(path); err != nil {
			t.Errorf("%s was removed: %v", path, err)
		}
	}
}

// A spill folder's marker names the process that made it.
func TestSpillMarker(t *testing.T) {
	s, err := NewSpill(t.TempDir(), 1, spillTestSchema())
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	pid, _, err := readSpillMarker(filepath.Join(s.Dir(), spillMarker))
	if err != nil || pid != os.Getpid() {
		t.Errorf("marker pid %d (%v), want %d", pid, err, os.Getpid())
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(s.Dir()); !os.IsNotExist(err) {
		t.Errorf("Close left %s (%v)", s.Dir(), err)
	}
}
