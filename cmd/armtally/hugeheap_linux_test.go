package main

import (
	"bufio"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"testing"
	"unsafe"
)

// TestPrepareHugeHeapAdvises checks the point of prepareHugeHeap: a large
// allocation made after it lies in memory advised for huge pages, which
// /proc/self/smaps marks with the flag "hg" (proc(5)); and that
// GODEBUG=disablethp=1 leaves the heap alone (the same check then
// fails). Each case runs in a fresh process (this test binary again),
// whose heap holds nothing of the other tests'. Where the kernel has no
// transparent huge pages (/sys/kernel/mm/transparent_hugepage absent) the
// advice fails and nothing may be marked.
func TestPrepareHugeHeapAdvises(t *testing.T) {
	_, statErr := os.Stat("/sys/kernel/mm/transparent_hugepage")
	thp := statErr == nil
	if godebug, ok := os.LookupEnv("ARMTALLY_TEST_HUGEHEAP"); ok {
		const n = 64 << 20
		prepareHugeHeap(256<<20, godebug)
		b := make([]byte, n)
		lo := uintptr(unsafe.Pointer(unsafe.SliceData(b)))
		if !advised(t, lo+hugePage, lo+n-hugePage) {
			t.Errorf("a %d-byte slice made after prepareHugeHeap is not in memory advised for huge pages", n)
		}
		return
	}
	for _, c := range []struct {
		godebug string
		advised bool
	}{{"", thp}, {"disablethp=1", false}} {
		cmd := exec.Command(os.Args[0], "-test.run=^TestPrepareHugeHeapAdvises$", "-test.count=1")
		cmd.Env = append(os.Environ(), "ARMTALLY_TEST_HUGEHEAP="+c.godebug)
		out, err := cmd.CombinedOutput()
		if got := err == nil; got != c.advised {
			t.Errorf("GODEBUG %q: slice advised %v, want %v; the child said:\n%s", c.godebug, got, c.advised, out)
		}
	}
	if disableTHP("") || !disableTHP("gctrace=1,disablethp=1") || disableTHP("disablethp=0") {
		t.Error("disableTHP reads GODEBUG wrongly")
	}
}

// advised reports whether every mapping overlapping [lo, hi) carries the
// smaps flag "hg" (MADV_HUGEPAGE), and fails the test when none does.
func advised(t *testing.T, lo, hi uintptr) bool {
	t.Helper()
	f, err := os.Open("/proc/self/smaps")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	var start, end uintptr
	overlapping, all := 0, true
	for sc.Scan() {
		line := sc.Text()
		// A mapping's header line starts with its range, "lo-hi", in hex;
		// the field lines start with a name and a colon.
		if first, _, _ := strings.Cut(line, " "); !strings.HasSuffix(first, ":") {
			a, b, ok := strings.Cut(first, "-")
			s, err1 := strconv.ParseUint(a, 16, 64)
			e, err2 := strconv.ParseUint(b, 16, 64)
			if !ok || err1 != nil || err2 != nil {
				t.Fatalf("smaps line %q: not a mapping's range", line)
			}
			start, end = uintptr(s), uintptr(e)
			continue
		}
		if rest, ok := strings.CutPrefix(line, "VmFlags:"); ok && start < hi && end > lo {
			overlapping++
			if !strings.Contains(" "+rest+" ", " hg ") {
				all = false
			}
		}
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	if overlapping == 0 {
		t.Fatalf("no mapping in /proc/self/smaps holds %#x-%#x", lo, hi)
	}
	return all
}
