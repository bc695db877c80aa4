package pipeline_test

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"

	"golang.org/x/sys/unix"
)

// A night writes its state over the spare beside the state file (the
// state of the night before last) and exchanges the two names. The state
// it leaves is the one a night writing a fresh temporary file leaves, byte
// for byte, whatever the spare held (longer junk included); a spare that
// another run holds locked, as one still reading it does, is not written,
// and the night writes a temporary file instead (common practice: a
// faster write path must leave the same file).
func TestStateSpare(t *testing.T) {
	days, files := exportDays(t)
	exps := stateExperiments()
	dir, state := t.TempDir(), filepath.Join(t.TempDir(), "nightly.state")
	spare := filepath.Join(filepath.Dir(state), ".nightly.state.spare")
	read := func(path string) []byte {
		t.Helper()
		b, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		return b
	}
	put := func(path string, b []byte) {
		t.Helper()
		if err := os.WriteFile(path, b, 0o600); err != nil {
			t.Fatal(err)
		}
	}
	for _, d := range days[:2] {
		writeDay(t, dir, d, files[d])
	}
	first := run(t, dir, state, exps) // every file, no spare yet
	if _, err := os.Stat(spare); !os.IsNotExist(err) {
		t.Fatalf("a spare after the first night: %v", err)
	}
	firstState := read(state)
	writeDay(t, dir, days[2], files[days[2]])
	run(t, dir, state, exps)
	if !bytes.Equal(read(spare), firstState) {
		t.Fatal("after the second night the spare is not the first night's state")
	}
	secondState, secondSpare := read(state), read(spare)
	writeDay(t, dir, days[3], files[days[3]])
	want := readoutBytes(t, run(t, dir, state, exps).Readouts)
	wantState := read(state)
	if !bytes.Equal(read(spare), secondState) {
		t.Error("after the third night the spare is not the second night's state")
	}
	if readoutBytes(t, first.Readouts) == want {
		t.Fatal("the third night changed nothing: the test does not test")
	}

	again := func(name string, spareBytes []byte, lock bool) {
		t.Helper()
		put(state, secondState)
		put(spare, spareBytes)
		var holder *os.File
		if lock {
			f, err := os.Open(spare)
			if err != nil {
				t.Fatal(err)
			}
			defer f.Close()
			if err := unix.Flock(int(f.Fd()), unix.LOCK_SH); err != nil {
				t.Fatal(err)
			}
			holder = f
		}
		got := readoutBytes(t, run(t, dir, state, exps).Readouts)
		if got != want || !bytes.Equal(read(state), wantState) {
			t.Errorf("%s: the readouts or the state differ from the night's written over the spare", name)
		}
		if holder != nil && !bytes.Equal(read(spare), spareBytes) {
			t.Errorf("%s: the locked spare was written", name)
		}
	}
	again("spare of longer junk", bytes.Repeat([]byte("junk"), len(wantState)/2), false)
	again("spare locked by a reader", secondSpare, true)
	if entries, _ := filepath.Glob(filepath.Join(filepath.Dir(state), ".nightly.state.*.tmp")); len(entries) != 0 {
		t.Errorf("temporary files left: %v", entries)
	}
}
