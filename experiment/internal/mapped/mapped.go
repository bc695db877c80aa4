// Package mapped turns a fault on reading memory mapped from a file into
// an error. A saved state is read from a file mapped into memory; if
// another process cuts the file short while it is mapped, reading its
// lost pages raises SIGBUS, which the Go runtime treats as a fatal error
// unless the reading goroutine has asked for a panic instead
// (runtime/debug.SetPanicOnFault). Guard does that for one call.
package mapped

import (
	"fmt"
	"runtime"
	"runtime/debug"
)

// Guard calls f on the calling goroutine with faults on memory reads
// turned into panics, recovers such a panic and returns it as an error
// wrapping base; any other panic goes on. The setting is per goroutine:
// goroutines that f starts need their own Guard.
func Guard(base error, f func() error) (err error) {
	old := debug.SetPanicOnFault(true)
	defer func() {
		debug.SetPanicOnFault(old)
		if v := recover(); v != nil {
			if re, ok := v.(runtime.Error); ok && isFault(re) {
				err = fmt.Errorf("%w: %v (was the file cut short while in use?)", base, re)
				return
			}
			panic(v)
		}
	}()
	return f()
}

// isFault reports whether a runtime error is a memory fault, which
// carries the faulting address (see debug.SetPanicOnFault).
func isFault(err runtime.Error) bool {
	_, ok := err.(interface{ Addr() uintptr })
	return ok
}
