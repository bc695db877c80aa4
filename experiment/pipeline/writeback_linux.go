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
