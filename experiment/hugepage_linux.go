package experiment

import (
	"unsafe"

	"golang.org/x/sys/unix"
)

// hugePage is the size of a transparent huge page on the common Linux
// platforms (x86-64, arm64 with 4 KiB pages).
const hugePage = 2 << 20

// hugeMin is the smallest slice adviseHuge advises: below it, at most one
// whole huge page fits inside and the advice is hardly worth a system call.
const hugeMin = 4 << 20

// adviseHuge asks the kernel to back the whole 2 MiB-aligned pages inside
// the capacity of s with transparent huge pages (madvise MADV_HUGEPAGE).
// Faulting in fresh memory 4 KiB at a time is expensive on virtual
// machines, and the per-unit arrays of a large tally are touched once,
// page after page, as they fill (cmd/bench/BENCHMARKS.md, "Huge pages for
// the per-unit memory"). Call it before the memory is first written. It
// is advice only: the kernel may refuse or ignore it (THP disabled), and
// errors are ignored. Memory outside s is never advised.
func adviseHuge[T any](s []T) {
	if cap(s) == 0 {
		return
	}
	var zero T
	n := uintptr(cap(s)) * unsafe.Sizeof(zero)
	if n < hugeMin {
		return
	}
	p := uintptr(unsafe.Pointer(unsafe.SliceData(s[:1])))
	lo := (p + hugePage - 1) &^ (hugePage - 1)
	hi := (p + n) &^ (hugePage - 1)
	if lo >= hi {
		return
	}
	b := unsafe.Slice((*byte)(unsafe.Add(unsafe.Pointer(unsafe.SliceData(s[:1])), lo-p)), hi-lo)
	_ = unix.Madvise(b, unix.MADV_HUGEPAGE)
}

// makeHuge returns a zeroed slice of n elements whose every page lies in
// whole 2 MiB pages advised for huge pages: when it holds hugeMin or
// more, it is cut from an allocation about 4 MiB longer, starting at the
// first huge-page boundary (or just past it, for elements whose size does
// not divide the offset), and the whole allocation is advised. The slack
// is never touched, so it costs address space, not memory, unless the
// allocator must zero reused memory. Its capacity is n.
func makeHuge[T any](n int) []T {
	var zero T
	size := int(unsafe.Sizeof(zero))
	if size == 0 || n*size < hugeMin {
		return make([]T, n)
	}
	// Up to 2 MiB + size before the first boundary, up to 2 MiB after
	// the last element to the next: 4 MiB and two elements cover both.
	extra := 2*hugePage/size + 2
	all := make([]T, n+extra)
	adviseHuge(all)
	p := uintptr(unsafe.Pointer(unsafe.SliceData(all)))
	skip := int(((p+hugePage-1)&^(hugePage-1) - p + uintptr(size) - 1) / uintptr(size))
	return all[skip : skip+n : skip+n]
}
