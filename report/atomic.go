package report

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
)

// WriteFileAtomic writes a file so that readers of path see either the old
// content or the complete new content, never a part. It is an OutputSet of
// one file: write is called once with a buffered writer onto a temporary
// file beside path's target; when it returns nil, the data is flushed,
// synced to disk and the temporary file renamed over the target. The
// directory is then synced, where the system allows.
//
// When write (or any step) fails, the temporary file is removed and path
// keeps its old content, or stays absent. A replaced file keeps its
// permission bits; a new file gets 0644. A path that is a symbolic link
// stays a link: the file it points to is written.
//
// A path that names a device or a pipe (/dev/null, /dev/stdout, a named
// pipe) cannot be replaced by a rename: the output is then written to it
// directly, in one piece after write has built it. A directory is an error.
//
// WriteFileAtomic does not lock: two concurrent writers to the same path
// each rename a complete file, and the last rename wins.
func WriteFileAtomic(path string, write func(io.Writer) error) error {
	s := NewOutputSet(context.Background())
	if err := s.Add(path, write); err != nil {
		return err
	}
	return s.Commit()
}

// OutputSet writes a group of files that belong together, such as the
// Markdown and JSON readouts of one run, so that either all of them are
// replaced or none is: Add writes each to a temporary file beside its
// target, and Commit renames them into place only when every Add has
// succeeded. Abort (or a failed Add or Commit) removes the temporary
// files and leaves every target as it was.
//
// The writes stop with the context's error once it is done (a signal, a
// deadline), checked as the buffered data goes to disk and before the
// renames. Once the renames start they are not interrupted; should a
// rename itself fail (a file system that goes away mid-run), the files
// renamed before it stay replaced and the others are left as they were.
//
// An OutputSet is not safe for concurrent use.
type OutputSet struct {
	ctx     context.Context
	pending []*pendingOutput
	done    bool
}

// pendingOutput is one file of an OutputSet, built and not yet in place.
type pendingOutput struct {
	// path is the name given to Add, for messages.
	path string
	// target is the file written: path, absolute, with symbolic links
	// followed.
	target string
	// tmp is the temporary file beside target; "" for a device.
	tmp string
	// data is the output for a device or a pipe, written by Commit.
	data []byte
}

// NewOutputSet returns an empty OutputSet whose writes stop when ctx is
// done.
func NewOutputSet(ctx context.Context) *OutputSet {
	return &OutputSet{ctx: ctx}
}

// ResolveOutput returns the file that writing to path replaces: path made
// absolute, with symbolic links followed (the link itself and any in its
// folders). The file need not exist; its folder must.
func ResolveOutput(path string) (string, error) {
	abs, err := filepath.Abs(path)
	if err != nil {
		return "", err
	}
	for hops := 0; ; hops++ {
		fi, err := os.Lstat(abs)
		if err == nil && fi.Mode()&fs.ModeSymlink != 0 {
			if hops == 40 {
				return "", fmt.Errorf("%s: too many levels of symbolic links", path)
			}
			link, err := os.Readlink(abs)
			if err != nil {
				return "", err
			}
			if !filepath.IsAbs(link) {
				link = filepath.Join(filepath.Dir(abs), link)
			}
			abs = link
			continue
		}
		if err != nil && !errors.Is(err, fs.ErrNotExist) {
			return "", err
		}
		dir, err := filepath.EvalSymlinks(filepath.Dir(abs))
		if err != nil {
			return "", err
		}
		return filepath.Join(dir, filepath.Base(abs)), nil
	}
}

// Add builds the output of path: write is called once with a buffered
// writer onto a temporary file beside path's target (for a device or a
// pipe, onto memory), and the file is flushed, given the target's
// permission bits (0644 for a new file) and synced. On an error the
// temporary file is removed, and so are those of the earlier Adds: the
// set is then aborted.
func (s *OutputSet) Add(path string, write func(io.Writer) error) (err error) {
	if s.done {
		return fmt.Errorf("write %s: the output set is already committed or aborted", path)
	}
	defer func() {
		if err != nil {
			s.Abort()
		}
	}()
	if err := s.ctx.Err(); err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	target, err := ResolveOutput(path)
	if err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	p := &pendingOutput{path: path, target: target}
	perm := fs.FileMode(0o644)
	if fi, statErr := os.Stat(target); statErr == nil {
		switch {
		case fi.IsDir():
			return fmt.Errorf("write %s: is a directory", path)
		case !fi.Mode().IsRegular():
			var b bytes.Buffer
			if err := write(&b); err != nil {
				return fmt.Errorf("write %s: %w", path, err)
			}
			p.data = b.Bytes()
			s.pending = append(s.pending, p)
			return nil
		}
		perm = fi.Mode().Perm()
	}
	f, err := os.CreateTemp(filepath.Dir(target), "."+filepath.Base(target)+".tmp-*")
	if err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	// Added before the writing, so that a failure removes it.
	p.tmp = f.Name()
	s.pending = append(s.pending, p)
	err = writeTemp(f, ctxWriter{s.ctx, f}, perm, write)
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = s.ctx.Err()
	}
	if err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	return nil
}

// writeTemp writes the output of write through w onto f, then sets f's
// permission bits and syncs it.
func writeTemp(f *os.File, w io.Writer, perm fs.FileMode, write func(io.Writer) error) error {
	bw := bufio.NewWriterSize(w, 64<<10)
	if err := write(bw); err != nil {
		return err
	}
	if err := bw.Flush(); err != nil {
		return err
	}
	if err := f.Chmod(perm); err != nil {
		return err
	}
	return f.Sync()
}

// ctxWriter is a writer that fails once its context is done.
type ctxWriter struct {
	ctx context.Context
	w   io.Writer
}

func (c ctxWriter) Write(b []byte) (int, error) {
	if err := c.ctx.Err(); err != nil {
		return 0, err
	}
	return c.w.Write(b)
}

// Commit puts every output of the set in place: the devices and pipes are
// written first, then each temporary file is renamed over its target and
// the folders are synced. When the context is already done, nothing is
// replaced and the temporary files are removed.
func (s *OutputSet) Commit() (err error) {
	if s.done {
		return errors.New("write: the output set is already committed or aborted")
	}
	defer s.Abort()
	if err := s.ctx.Err(); err != nil {
		return fmt.Errorf("write: %w", err)
	}
	for _, p := range s.pending {
		if p.tmp == "" {
			if err := writeDevice(p.target, p.data); err != nil {
				return fmt.Errorf("write %s: %w", p.path, err)
			}
		}
	}
	dirs := map[string]bool{}
	for _, p := range s.pending {
		if p.tmp == "" {
			continue
		}
		if err := os.Rename(p.tmp, p.target); err != nil {
			return fmt.Errorf("write %s: %w", p.path, err)
		}
		p.tmp = ""
		if dir := filepath.Dir(p.target); !dirs[dir] {
			dirs[dir] = true
			syncDir(dir)
		}
	}
	return nil
}

// Abort removes the temporary files of the outputs not yet in place and
// ends the set; later calls do nothing.
func (s *OutputSet) Abort() {
	if s.done {
		return
	}
	s.done = true
	for _, p := range s.pending {
		if p.tmp != "" {
			os.Remove(p.tmp)
			p.tmp = ""
		}
	}
}

// writeDevice writes data to an existing device or pipe.
func writeDevice(path string, data []byte) error {
	f, err := os.OpenFile(path, os.O_WRONLY, 0)
	if err != nil {
		return err
	}
	if _, err := f.Write(data); err != nil {
		f.Close()
		return err
	}
	return f.Close()
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
