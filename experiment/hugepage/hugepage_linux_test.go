package hugepage

import (
	"bufio"
	"bytes"
	"fmt"
	"os"
	"os/exec"
	"slices"
	"strings"
	"testing"
	"unsafe"

	"golang.org/x/sys/unix"
)

// TestAdviseAlignedInside checks that Advise marks exactly the
// whole 2 MiB-aligned pages inside the slice for huge pages and nothing
// around them: the kernel's /proc/self/smaps lists each mapping with its
// flags, "hg" for MADV_HUGEPAGE (proc(5)). The slice is cut from a
// mapping of our own, so no other memory of the process can merge with
// it. Where the kernel has no transparent huge pages
// (/sys/kernel/mm/transparent_hugepage absent) the advice fails and
// nothing may be marked.
func TestAdviseAlignedInside(t *testing.T) {
	const size = 16 << 20
	m, err := unix.Mmap(-1, 0, size, unix.PROT_READ|unix.PROT_WRITE, unix.MAP_PRIVATE|unix.MAP_ANON)
	if err != nil {
		t.Fatal(err)
	}
	defer unix.Munmap(m)
	base := uintptr(unsafe.Pointer(&m[0]))
	first := (base+hugePage-1)&^(hugePage-1) - base // offset of the first aligned page
	_, statErr := os.Stat("/sys/kernel/mm/transparent_hugepage")
	thp := statErr == nil
	cases := []struct {
		name   string
		lo, hi uintptr // the slice, as offsets into m
		want   [][2]uintptr
	}{
		// A slice from 4 KiB past an aligned page to 4 KiB before the one
		// three pages on holds two whole pages: the second and third.
		{"unaligned ends", first + 4096, first + 3*hugePage - 4096, [][2]uintptr{{first + hugePage, first + 2*hugePage}}},
		// Exactly four aligned pages: all four.
		{"aligned", first, first + 4*hugePage, [][2]uintptr{{first, first + 4*hugePage}}},
		// Under hugeMin: no advice at all.
		{"small", first, first + hugeMin - 8, nil},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if err := unix.Madvise(m, unix.MADV_NOHUGEPAGE); err != nil && thp {
				t.Fatal(err)
			}
			if err := unix.Madvise(m, unix.MADV_NORMAL); err != nil {
				t.Fatal(err)
			}
			s := unsafe.Slice((*uint64)(unsafe.Pointer(&m[c.lo])), (c.hi-c.lo)/8)
			Advise(s)
			got := hugeRanges(t, base, base+size)
			want := c.want
			if !thp {
				want = nil
			}
			if fmt.Sprint(got) != fmt.Sprint(want) && !(len(got) == 0 && len(want) == 0) {
				t.Errorf("advised %x (offsets into the mapping), want %x", got, want)
			}
		})
	}
}

// hugeRanges returns the ranges of [lo, hi) marked "hg" in
// /proc/self/smaps, as offsets from lo.
func hugeRanges(t *testing.T, lo, hi uintptr) [][2]uintptr {
	t.Helper()
	data, err := os.ReadFile("/proc/self/smaps")
	if err != nil {
		t.Fatal(err)
	}
	var out [][2]uintptr
	var start, end uintptr
	sc := bufio.NewScanner(bytes.NewReader(data))
	for sc.Scan() {
		f := strings.Fields(sc.Text())
		switch {
		case len(f) == 0:
		case !strings.HasSuffix(f[0], ":"): // a mapping's line: "start-end perms ..."
			if _, err := fmt.Sscanf(f[0], "%x-%x", &start, &end); err != nil {
				t.Fatalf("smaps line %q: %v", sc.Text(), err)
			}
		case f[0] == "VmFlags:" && end > lo && start < hi && slices.Contains(f[1:], "hg"):
			r := [2]uintptr{max(start, lo) - lo, min(end, hi) - lo}
			if k := len(out) - 1; k >= 0 && out[k][1] == r[0] {
				out[k][1] = r[1] // next to the last: one range
				continue
			}
			out = append(out, r)
		}
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}

// TestMakeCovered checks that every byte of a slice from Make
// lies in memory marked for huge pages ("hg" in /proc/self/smaps,
// proc(5)), for element sizes that divide 2 MiB and one that does not
// (24 bytes), and that the slice is n long, n in capacity and zeroed.
// (Slices under hugeMin are a plain make, in heap memory that an earlier
// advice may cover, so they are not checked here.)
func TestMakeCovered(t *testing.T) {
	_, statErr := os.Stat("/sys/kernel/mm/transparent_hugepage")
	thp := statErr == nil
	check := func(t *testing.T, p unsafe.Pointer, bytes uintptr, n, length, capacity int, zeroed bool) {
		t.Helper()
		if length != n || capacity != n || !zeroed {
			t.Fatalf("len %d cap %d zeroed %v; want %d, %d, true", length, capacity, zeroed, n, n)
		}
		lo := uintptr(p)
		got := hugeRanges(t, lo, lo+bytes)
		covered := len(got) == 1 && got[0] == [2]uintptr{0, bytes}
		if covered != thp {
			t.Errorf("%d bytes: advised %x (offsets into the slice); want all advised: %v", bytes, got, thp)
		}
	}
	for _, n := range []int{hugeMin + 24, 3*hugeMin + 12345} { // bytes, at least hugeMin after rounding down
		b := Make[byte](n)
		check(t, unsafe.Pointer(&b[0]), uintptr(n), n, len(b), cap(b), !slices.ContainsFunc(b, func(v byte) bool { return v != 0 }))
		u := Make[uint64](n / 8)
		check(t, unsafe.Pointer(&u[0]), uintptr(n/8*8), n/8, len(u), cap(u), !slices.ContainsFunc(u, func(v uint64) bool { return v != 0 }))
		w := Make[[3]uint64](n / 24)
		check(t, unsafe.Pointer(&w[0]), uintptr(n/24*24), n/24, len(w), cap(w), !slices.ContainsFunc(w, func(v [3]uint64) bool { return v != [3]uint64{} }))
	}
}

// TestPrepareHeapAdvises checks the point of PrepareHeap: a large
// allocation made after it lies in memory advised for huge pages ("hg" in
// /proc/self/smaps); and that GODEBUG=disablethp=1 leaves the heap alone
// (the same check then fails). Each case runs in a fresh process (this
// test binary again), whose heap holds nothing of the other tests'. Where
// the kernel has no transparent huge pages nothing may be marked.
func TestPrepareHeapAdvises(t *testing.T) {
	_, statErr := os.Stat("/sys/kernel/mm/transparent_hugepage")
	thp := statErr == nil
	if godebug, ok := os.LookupEnv("ARMTALLY_TEST_HUGEHEAP"); ok {
		const n = 64 << 20
		PrepareHeap(256<<20, godebug)
		b := make([]byte, n)
		lo := uintptr(unsafe.Pointer(unsafe.SliceData(b)))
		want := [2]uintptr{0, n - 2*hugePage}
		if got := hugeRanges(t, lo+hugePage, lo+n-hugePage); len(got) != 1 || got[0] != want {
			t.Errorf("a %d-byte slice made after PrepareHeap: advised %x (offsets), want %x", n, got, want)
		}
		return
	}
	for _, c := range []struct {
		godebug string
		advised bool
	}{{"", thp}, {"disablethp=1", false}} {
		cmd := exec.Command(os.Args[0], "-test.run=^TestPrepareHeapAdvises$", "-test.count=1")
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
