//go:build !linux

// Package hugepage: see hugepage_linux.go; on this system every function
// is a plain allocation or does nothing.
package hugepage

// Advise does nothing on this system; see hugepage_linux.go.
func Advise[T any](s []T) {}

// Make returns make([]T, n); see hugepage_linux.go.
func Make[T any](n int) []T { return make([]T, n) }

// PrepareHeap does nothing on this system; see hugepage_linux.go.
func PrepareHeap(n int64, godebug string) {}

// PhysicalMemory returns 0 (unknown) on this system.
func PhysicalMemory() int64 { return 0 }
