// Package hugepage asks Linux for transparent huge pages where armtally
// touches much fresh memory at once: the tally's per-unit arrays (Make,
// Advise) and, before a large run, the first part of the Go heap
// (PrepareHeap). Faulting memory in 4 KiB at a time was the largest cost
// left in a large run (cmd/bench/BENCHMARKS.md). On other systems every
// function is a plain allocation or does nothing.
package hugepage

import (
	"runtime"
	"strings"
	"unsafe"

	"golang.org/x/sys/unix"
)

// hugePage is the size of a transparent huge page on the common Linux
// platforms (x86-64, arm64 with 4 KiB pages).
const hugePage = 2 << 20

// hugeMin is the smallest slice Advise advises: below it, at most one
// whole huge page fits inside and the advice is hardly worth a system call.
const hugeMin = 4 << 20

// Advise asks the kernel to back the whole 2 MiB-aligned pages inside
// the capacity of s with transparent huge pages (madvise MADV_HUGEPAGE).
// Faulting in fresh memory 4 KiB at a time is expensive on virtual
// machines, and the per-unit arrays of a large tally are touched once,
// page after page, as they fill (cmd/bench/BENCHMARKS.md, "Huge pages for
// the per-unit memory"). Call it before the memory is first written. It
// is advice only: the kernel may refuse or ignore it (THP disabled), and
// errors are ignored. Memory outside s is never advised.
func Advise[T any](s []T) {
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

// Make returns a zeroed slice of n elements whose every page lies in
// whole 2 MiB pages advised for huge pages: when it holds hugeMin or
// more, it is cut from an allocation about 4 MiB longer, starting at the
// first huge-page boundary (or just past it, for elements whose size does
// not divide the offset), and the whole allocation is advised. The slack
// is never touched, so it costs address space, not memory, unless the
// allocator must zero reused memory. Its capacity is n.
func Make[T any](n int) []T {
	var zero T
	size := int(unsafe.Sizeof(zero))
	if size == 0 || n*size < hugeMin {
		return make([]T, n)
	}
	// Up to 2 MiB + size before the first boundary, up to 2 MiB after
	// the last element to the next: 4 MiB and two elements cover both.
	extra := 2*hugePage/size + 2
	all := make([]T, n+extra)
	Advise(all)
	p := uintptr(unsafe.Pointer(unsafe.SliceData(all)))
	skip := int(((p+hugePage-1)&^(hugePage-1) - p + uintptr(size) - 1) / uintptr(size))
	return all[skip : skip+n : skip+n]
}

// PrepareHeap makes the first n bytes of the Go heap's free memory
// eligible for transparent huge pages before a large run: it allocates
// one untouched slice of n bytes (fresh memory the runtime maps but does
// not write), advises its whole 2 MiB pages with madvise(MADV_HUGEPAGE),
// drops it and collects it, so that the run's allocations, which the
// runtime places in the lowest free addresses first, fault in 2 MiB at a
// time instead of 4 KiB. Faulting fresh memory in small pages was the
// largest cost left in a large run (cmd/bench/BENCHMARKS.md, "Huge pages
// for the Go heap"); most distributions set transparent_hugepage to
// "madvise", which uses huge pages only where advised, and the runtime
// no longer advises its heap. The advice is only advice: where the kernel
// has no huge pages it fails and is ignored. It does nothing when n is
// 0 or GODEBUG holds disablethp=1 (the runtime's own switch for huge
// pages on the heap).
func PrepareHeap(n int64, godebug string) {
	if n < hugeMin || disableTHP(godebug) {
		return
	}
	b := make([]byte, n)
	Advise(b)
	runtime.KeepAlive(b)
	b = nil
	// Collect the slice now: left to the first collection of the run it
	// would stay live through it, doubling the heap goal and sending the
	// run's allocations past it into memory not advised.
	runtime.GC()
}

// disableTHP reports whether godebug (the GODEBUG setting) turns the
// runtime's huge pages off.
func disableTHP(godebug string) bool {
	for _, kv := range strings.Split(godebug, ",") {
		if strings.TrimSpace(kv) == "disablethp=1" {
			return true
		}
	}
	return false
}

// PhysicalMemory returns the machine's memory in bytes, 0 when unknown.
func PhysicalMemory() int64 {
	var si unix.Sysinfo_t
	if err := unix.Sysinfo(&si); err != nil {
		return 0
	}
	return int64(si.Totalram) * int64(si.Unit)
}
