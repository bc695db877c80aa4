//go:build !linux

package main

// prepareHugeHeap does nothing on this system; see hugeheap_linux.go.
func prepareHugeHeap(n int64, godebug string) {}

// physicalMemory returns 0 (unknown) on this system.
func physicalMemory() int64 { return 0 }
