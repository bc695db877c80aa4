package experiment

import (
	"bufio"
	"bytes"
	"fmt"
	"os"
	"slices"
	"strings"
	"testing"
	"unsafe"

	"golang.org/x/sys/unix"
)

// TestAdviseHugeAlignedInside checks that adviseHuge marks exactly the
// whole 2 MiB-aligned pages inside the slice for huge pages and nothing
// around them: the kernel's /proc/self/smaps lists each mapping with its
// flags, "hg" for MADV_HUGEPAGE (proc(5)). The slice is cut from a
// mapping of our own, so no other memory of the process can merge with
// it. Where the kernel has no transparent huge pages
// (/sys/kernel/mm/transparent_hugepage absent) the advice fails and
// nothing may be marked.
func TestAdviseHugeAlignedInside(t *testing.T) {
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
			adviseHuge(s)
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
			out = append(out, [2]uintptr{max(start, lo) - lo, min(end, hi) - lo})
		}
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}
