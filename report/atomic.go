package report

import (
	"bufio"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
)

// WriteFileAtomic writes a file so that readers of path see either the old
// content or the complete new content, never a part. write is called once
// with a buffered writer onto a temporary file in path's directory; when it
// returns nil, the data is flushed, synced to disk and the temporary file
// renamed over path. The directory is then synced, where the system allows.
//
// When write (or any step) fails, the temporary file is removed and path
// keeps its old content, or stays absent. A replaced file keeps its
// permission bits; a new file gets 0644.
//
// A path that names a device or a pipe (/dev/null, /dev/stdout, a named
// pipe) cannot be replaced by a rename: the output is then written to it
// directly, in one piece after write has built it. A directory is an error.
//
// WriteFileAtomic does not lock: two concurrent writers to the same path
// each rename a complete file, and the last rename wins.
func WriteFileAtomic(path string, write func(io.Writer) error) (err error) {
	dir, base := filepath.Split(path)
	if dir == "" {
		dir = "."
	}
	perm := fs.FileMode(0o644)
	if fi, statErr := os.Stat(path); statErr == nil {
		switch {
		case fi.IsDir():
			return fmt.Errorf("write %s: is a directory", path)
		case !fi.Mode().IsRegular():
			return writeDevice(path, write)
		}
		perm = fi.Mode().Perm()
	}
	f, err := os.CreateTemp(dir, "."+base+".tmp-*")
	if err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	tmp := f.Name()
	defer func() {
		if err != nil {
			f.Close()
			os.Remove(tmp)
		}
	}()
	bw := bufio.NewWriter(f)
	if err := write(bw); err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	if err := f.Chmod(perm); err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	if err := f.Sync(); err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	if err := f.Close(); err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	if err := os.Rename(tmp, path); err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	syncDir(dir)
	return nil
}

// writeDevice writes the output of write to an existing device or pipe.
func writeDevice(path string, write func(io.Writer) error) error {
	f, err := os.OpenFile(path, os.O_WRONLY, 0)
	if err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	bw := bufio.NewWriter(f)
	if err := write(bw); err != nil {
		f.Close()
		return fmt.Errorf("write %s: %w", path, err)
	}
	if err := bw.Flush(); err != nil {
		f.Close()
		return fmt.Errorf("write %s: %w", path, err)
	}
	if err := f.Close(); err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	return nil
}

// syncDir makes a rename in dir durable. Some systems cannot open or sync a
// directory; the file itself is already synced, so failures are ignored.
func syncDir(dir string) {
	d, err := os.Open(dir)
	if err != nil {
		return
	}
	_ = d.Sync()
	d.Close()
}
