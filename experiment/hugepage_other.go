//go:build !linux

package experiment

// adviseHuge does nothing on this system; see hugepage_linux.go.
func adviseHuge[T any](s []T) {}

// makeHuge returns make([]T, n); see hugepage_linux.go.
func makeHuge[T any](n int) []T { return make([]T, n) }
