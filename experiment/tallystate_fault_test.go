//go:build unix

package experiment

import (
	"errors"
	"io"
	"os"
	"path/filepath"
	"syscall"
	"testing"
)

// mapState writes state to a file, maps it read-only and returns the
// mapping and a function that cuts the file short (to zero bytes), as
// another process might while a run has it mapped.
func mapState(t *testing.T, state []byte) (data []byte, cut func()) {
	t.Helper()
	path := filepath.Join(t.TempDir(), "tally.state")
	if err := os.WriteFile(path, state, 0o644); err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	data, err = syscall.Mmap(int(f.Fd()), 0, len(state), syscall.PROT_READ, syscall.MAP_SHARED)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { syscall.Munmap(data) })
	return data, func() {
		if err := os.Truncate(path, 0); err != nil {
			t.Fatal(err)
		}
	}
}

// A saved state mapped from a file that is cut short while in use gives
// an ErrStateFormat when it is read or merged, not a crash of the process
// (reading a lost page of a mapping raises SIGBUS; common practice for
// memory-mapped input).
func TestMappedStateCutShort(t *testing.T) {
	spec := stateSpec(MultiArmFirst)
	days := manyUnitDays(2)
	_, _, state, err := resume(t, spec, nil, days[0], 2)
	if err != nil {
		t.Fatal(err)
	}
	if len(state) < 4*os.Getpagesize() {
		t.Fatalf("state of %d bytes, want several pages", len(state))
	}

	t.Run("cut before ReadState", func(t *testing.T) {
		data, cut := mapState(t, state)
		cut()
		tl, _ := newTallier(spec, 2)
		if err := tl.ReadState(data); !errors.Is(err, ErrStateFormat) {
			t.Fatalf("ReadState: error %v, want ErrStateFormat", err)
		}
	})
	for _, tc := range []struct {
		name   string
		finish func(tl *Tallier) error
	}{
		{"cut before Tally", func(tl *Tallier) error { _, err := tl.Tally(); return err }},
		{"cut before WriteState", func(tl *Tallier) error { return tl.WriteState(io.Discard) }},
	} {
		t.Run(tc.name, func(t *testing.T) {
			data, cut := mapState(t, state)
			tl, _ := newTallier(spec, 2)
			if err := tl.ReadState(data); err != nil {
				t.Fatal(err)
			}
			rec := batch(t, days[1], spec.Segments...)
			err := tl.Add(rec)
			rec.Release()
			if err != nil {
				t.Fatal(err)
			}
			cut()
			if err := tc.finish(tl); !errors.Is(err, ErrStateFormat) {
				t.Fatalf("error %v, want ErrStateFormat", err)
			}
		})
	}
}
