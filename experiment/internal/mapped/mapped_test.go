//go:build unix

package mapped

import (
	"errors"
	"os"
	"path/filepath"
	"runtime/debug"
	"strings"
	"syscall"
	"testing"
)

var errBase = errors.New("base")

// Reading a page of a mapping whose file was cut short raises SIGBUS:
// inside Guard it is an error wrapping the base error (common practice
// for memory-mapped input); the goroutine's own setting is restored; f's
// own error and other panics pass through as they are.
func TestGuard(t *testing.T) {
	path := filepath.Join(t.TempDir(), "f")
	page := os.Getpagesize()
	if err := os.WriteFile(path, make([]byte, 2*page), 0o644); err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	data, err := syscall.Mmap(int(f.Fd()), 0, 2*page, syscall.PROT_READ, syscall.MAP_SHARED)
	if err != nil {
		t.Fatal(err)
	}
	defer syscall.Munmap(data)
	if err := os.Truncate(path, 0); err != nil {
		t.Fatal(err)
	}
	var sink byte
	err = Guard(errBase, func() error {
		sink += data[page]
		return nil
	})
	if !errors.Is(err, errBase) || !strings.Contains(err.Error(), "cut short") {
		t.Fatalf("reading a lost page: error %v, want one wrapping %v", err, errBase)
	}
	if debug.SetPanicOnFault(false) {
		t.Error("Guard left the goroutine's panic-on-fault setting on")
	}

	own := errors.New("own")
	if err := Guard(errBase, func() error { return own }); err != own {
		t.Errorf("f's own error: got %v", err)
	}
	if err := Guard(errBase, func() error { return nil }); err != nil {
		t.Errorf("no fault: got %v", err)
	}
	func() {
		defer func() {
			if v := recover(); v != "other" {
				t.Errorf("another panic: recovered %v, want it to pass through", v)
			}
		}()
		Guard(errBase, func() error { panic("other") })
	}()
	func() {
		defer func() {
			if v := recover(); v == nil {
				t.Error("a nil dereference was swallowed")
			}
		}()
		var p *int
		Guard(errBase, func() error { sink += byte(*p); return nil })
	}()
	_ = sink
}
