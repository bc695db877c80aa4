package pipeline

import (
	"os"

	"golang.org/x/sys/unix"
)

// startWriteback asks the kernel to start writing n bytes of f from off
// to disk without waiting for them (sync_file_range with
// SYNC_FILE_RANGE_WRITE). It is only a head start for the File.Sync that
// follows, which alone makes the data durable; errors are ignored, for
// that sync reports them.
func startWriteback(f *os.File, off, n int64) {
	_ = unix.SyncFileRange(int(f.Fd()), off, n, unix.SYNC_FILE_RANGE_WRITE)
}

// openSpare opens the spare state file name to be written in place,
// creating it when missing, and locks it (flock, exclusive, without
// waiting); nil when another run holds it or it cannot be opened, and the
// caller writes a temporary file instead.
func openSpare(name string) *os.File {
	f, err := os.OpenFile(name, os.O_RDWR|os.O_CREATE|unix.O_NOFOLLOW, 0o600)
	if err != nil {
		return nil
	}
	if st, err := f.Stat(); err != nil || !st.Mode().IsRegular() {
		f.Close()
		return nil
	}
	if err := unix.Flock(int(f.Fd()), unix.LOCK_EX|unix.LOCK_NB); err != nil {
		f.Close()
		return nil
	}
	return f
}

// replaceState puts the complete spare at the state's path and the old
// state at the spare's, in one step (renameat2 RENAME_EXCHANGE); with no
// old state, or where the file system cannot exchange, it renames the
// spare over the path.
func replaceState(spare, path string) error {
	err := unix.Renameat2(unix.AT_FDCWD, spare, unix.AT_FDCWD, path, unix.RENAME_EXCHANGE)
	if err == nil {
		return nil
	}
	return os.Rename(spare, path)
}

// lockShared takes a shared lock on f (flock), waiting for a run that
// holds it exclusively, which is one that has just put its new state in
// place and is closing it. A spare (openSpare) locked this way by a run
// still reading it as its old state is not written in place. Errors are
// ignored: the lock only guards the spare's reuse.
func lockShared(f *os.File) { _ = unix.Flock(int(f.Fd()), unix.LOCK_SH) }
