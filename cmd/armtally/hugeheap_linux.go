package main

import (
	"runtime"
	"strings"
	"unsafe"

	"golang.org/x/sys/unix"
)

// hugePage is the size of a transparent huge page on the common Linux
// platforms (x86-64, arm64 with 4 KiB pages).
const hugePage = 2 << 20

// prepareHugeHeap makes the first n bytes of the Go heap's free memory
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
func prepareHugeHeap(n int64, godebug string) {
	if n < 2*hugePage || disableTHP(godebug) {
		return
	}
	b := make([]byte, n)
	p := uintptr(unsafe.Pointer(unsafe.SliceData(b)))
	lo := (p + hugePage - 1) &^ (hugePage - 1)
	hi := (p + uintptr(n)) &^ (hugePage - 1)
	if lo < hi {
		whole := unsafe.Slice((*byte)(unsafe.Add(unsafe.Pointer(unsafe.SliceData(b)), lo-p)), hi-lo)
		_ = unix.Madvise(whole, unix.MADV_HUGEPAGE)
	}
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

// physicalMemory returns the machine's memory in bytes, 0 when unknown.
func physicalMemory() int64 {
	var si unix.Sysinfo_t
	if err := unix.Sysinfo(&si); err != nil {
		return 0
	}
	return int64(si.Totalram) * int64(si.Unit)
}
