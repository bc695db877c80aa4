//go:build !linux

package experiment

// adviseHuge does nothing on this system; see hugepage_linux.go.
func adviseHuge[T any](s []T) {}
