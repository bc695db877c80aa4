//go:build !linux

package pipeline

import "os"

// startWriteback does nothing here: the File.Sync that follows writes
// everything (see the Linux version).
func startWriteback(f *os.File, off, n int64) {}

// openSpare returns nil here: the state is written to a temporary file
// and renamed (see the Linux version).
func openSpare(name string) *os.File { return nil }

// replaceState renames the spare over the path.
func replaceState(spare, path string) error { return os.Rename(spare, path) }

// lockShared does nothing here: there is no spare to guard.
func lockShared(f *os.File) {}
