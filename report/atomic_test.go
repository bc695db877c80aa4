package report

import (
	"context"
	"errors"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
)

// dirNames lists the names in dir, to catch temporary files left behind.
func dirNames(t *testing.T, dir string) []string {
	t.Helper()
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, e := range entries {
		names = append(names, e.Name())
	}
	return names
}

func writeString(s string) func(io.Writer) error {
	return func(w io.Writer) error {
		_, err := io.WriteString(w, s)
		return err
	}
}

func TestWriteFileAtomic(t *testing.T) {
	errBoom := errors.New("boom")
	tests := []struct {
		name     string
		old      *string // content before the call; nil for no file
		write    func(io.Writer) error
		wantErr  error
		wantBody *string // content after the call; nil for no file
	}{
		{
			name:     "creates",
			write:    writeString("first\n"),
			wantBody: ptr("first\n"),
		},
		{
			name:     "replaces",
			old:      ptr("old content that is longer\n"),
			write:    writeString("new\n"),
			wantBody: ptr("new\n"),
		},
		{
			name: "failed write keeps the old file",
			old:  ptr("old\n"),
			write: func(w io.Writer) error {
				io.WriteString(w, "half a readout")
				return errBoom
			},
			wantErr:  errBoom,
			wantBody: ptr("old\n"),
		},
		{
			name: "failed write creates nothing",
			write: func(w io.Writer) error {
				return errBoom
			},
			wantErr: errBoom,
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			path := filepath.Join(dir, "readout.md")
			if tc.old != nil {
				if err := os.WriteFile(path, []byte(*tc.old), 0o600); err != nil {
					t.Fatal(err)
				}
			}
			err := WriteFileAtomic(path, tc.write)
			if !errors.Is(err, tc.wantErr) {
				t.Fatalf("error %v, want %v", err, tc.wantErr)
			}
			got, readErr := os.ReadFile(path)
			switch {
			case tc.wantBody == nil && !errors.Is(readErr, os.ErrNotExist):
				t.Errorf("file exists (read error %v), want none", readErr)
			case tc.wantBody != nil && readErr != nil:
				t.Errorf("read: %v", readErr)
			case tc.wantBody != nil && string(got) != *tc.wantBody:
				t.Errorf("content %q, want %q", got, *tc.wantBody)
			}
			names := dirNames(t, dir)
			wantNames := 0
			if tc.wantBody != nil {
				wantNames = 1
			}
			if len(names) != wantNames {
				t.Errorf("directory holds %q; want only the output file (temporary file left behind?)", names)
			}
			if tc.old != nil && runtime.GOOS != "windows" {
				fi, err := os.Stat(path)
				if err != nil {
					t.Fatal(err)
				}
				if fi.Mode().Perm() != 0o600 {
					t.Errorf("mode %v, want the old file's 0600", fi.Mode().Perm())
				}
			}
		})
	}
}

func TestWriteFileAtomicNewFileMode(t *testing.T) {
	if runtime.GOOS == "windows" {
		t.Skip("no Unix permission bits")
	}
	path := filepath.Join(t.TempDir(), "readout.json")
	if err := WriteFileAtomic(path, writeString("{}\n")); err != nil {
		t.Fatal(err)
	}
	fi, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	if fi.Mode().Perm() != 0o644 {
		t.Errorf("mode %v, want 0644", fi.Mode().Perm())
	}
}

func TestWriteFileAtomicErrors(t *testing.T) {
	dir := t.TempDir()
	tests := []struct {
		name string
		path string
	}{
		{"missing directory", filepath.Join(dir, "no-such-dir", "readout.md")},
		{"path is a directory", dir},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if err := WriteFileAtomic(tc.path, writeString("x")); err == nil {
				t.Error("no error")
			}
			if names := dirNames(t, dir); len(names) != 0 {
				t.Errorf("directory holds %q, want nothing", names)
			}
		})
	}
}

// TestWriteFileAtomicNonRegular checks that a device is written directly
// (a rename cannot replace it) and that a directory is refused.
func TestWriteFileAtomicNonRegular(t *testing.T) {
	if _, err := os.Stat(os.DevNull); err != nil {
		t.Skip("no null device")
	}
	called := false
	err := WriteFileAtomic(os.DevNull, func(w io.Writer) error {
		called = true
		_, err := io.WriteString(w, "discarded\n")
		return err
	})
	if err != nil || !called {
		t.Errorf("writing %s: err %v, called %v", os.DevNull, err, called)
	}
	dir := t.TempDir()
	err = WriteFileAtomic(dir, func(w io.Writer) error { return nil })
	if err == nil || !strings.Contains(err.Error(), "is a directory") {
		t.Errorf("writing a directory: err %v", err)
	}
}

// readOrNone returns the content of path, or "<none>" when it does not
// exist.
func readOrNone(t *testing.T, path string) string {
	t.Helper()
	b, err := os.ReadFile(path)
	if errors.Is(err, os.ErrNotExist) {
		return "<none>"
	}
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

// TestOutputSet checks that the files of a set are replaced together or
// not at all, and that no temporary file stays behind either way.
func TestOutputSet(t *testing.T) {
	errBoom := errors.New("boom")
	cancelled, cancel := context.WithCancel(context.Background())
	cancel()
	tests := []struct {
		name string
		ctx  context.Context
		// second is the write of b.json; a.md always succeeds.
		second     func(io.Writer) error
		wantErr    error
		wantA      string
		wantB      string
		skipCommit bool
	}{
		{name: "both replaced", ctx: context.Background(), second: writeString("new b\n"), wantA: "new a\n", wantB: "new b\n"},
		{name: "a failed second write replaces neither", ctx: context.Background(), second: func(w io.Writer) error {
			io.WriteString(w, "half")
			return errBoom
		}, wantErr: errBoom, wantA: "old a\n", wantB: "<none>"},
		{name: "a done context replaces neither", ctx: cancelled, second: writeString("new b\n"), wantErr: context.Canceled, wantA: "old a\n", wantB: "<none>"},
		{name: "abort replaces neither", ctx: context.Background(), second: writeString("new b\n"), wantA: "old a\n", wantB: "<none>", skipCommit: true},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			a, b := filepath.Join(dir, "a.md"), filepath.Join(dir, "b.json")
			if err := os.WriteFile(a, []byte("old a\n"), 0o644); err != nil {
				t.Fatal(err)
			}
			s := NewOutputSet(tc.ctx)
			err := s.Add(a, writeString("new a\n"))
			if err == nil {
				err = s.Add(b, tc.second)
			}
			switch {
			case err != nil:
			case tc.skipCommit:
				s.Abort()
			default:
				err = s.Commit()
			}
			if !errors.Is(err, tc.wantErr) {
				t.Fatalf("error %v, want %v", err, tc.wantErr)
			}
			if got := readOrNone(t, a); got != tc.wantA {
				t.Errorf("a.md holds %q, want %q", got, tc.wantA)
			}
			if got := readOrNone(t, b); got != tc.wantB {
				t.Errorf("b.json holds %q, want %q", got, tc.wantB)
			}
			for _, name := range dirNames(t, dir) {
				if name != "a.md" && name != "b.json" {
					t.Errorf("temporary file %s left behind", name)
				}
			}
		})
	}
}

// TestOutputSetSymlink checks that an output path that is a symbolic link
// (here a relative one, through a second link) stays a link and that the
// file it points to gets the content.
func TestOutputSetSymlink(t *testing.T) {
	dir := t.TempDir()
	real := filepath.Join(dir, "real", "readout.md")
	if err := os.Mkdir(filepath.Dir(real), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(real, []byte("old\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	mid := filepath.Join(dir, "mid.md")
	link := filepath.Join(dir, "link.md")
	if err := os.Symlink(filepath.Join("real", "readout.md"), mid); err != nil {
		t.Skipf("no symbolic links: %v", err)
	}
	if err := os.Symlink("mid.md", link); err != nil {
		t.Fatal(err)
	}
	if err := WriteFileAtomic(link, writeString("new\n")); err != nil {
		t.Fatal(err)
	}
	for _, l := range []string{link, mid} {
		fi, err := os.Lstat(l)
		if err != nil || fi.Mode()&os.ModeSymlink == 0 {
			t.Errorf("%s is no longer a symbolic link (%v, %v)", l, fi, err)
		}
	}
	if got := readOrNone(t, real); got != "new\n" {
		t.Errorf("the link's target holds %q, want %q", got, "new\n")
	}
	if fi, err := os.Stat(real); err == nil && runtime.GOOS != "windows" && fi.Mode().Perm() != 0o600 {
		t.Errorf("mode %v, want the old file's 0600", fi.Mode().Perm())
	}
	if names := dirNames(t, filepath.Dir(real)); len(names) != 1 {
		t.Errorf("the target's folder holds %q, want only readout.md", names)
	}
	// A link to a file that does not exist yet creates that file.
	dangling := filepath.Join(dir, "dangling.md")
	if err := os.Symlink(filepath.Join("real", "new.md"), dangling); err != nil {
		t.Fatal(err)
	}
	if err := WriteFileAtomic(dangling, writeString("created\n")); err != nil {
		t.Fatal(err)
	}
	if got := readOrNone(t, filepath.Join(dir, "real", "new.md")); got != "created\n" {
		t.Errorf("the dangling link's target holds %q", got)
	}
}

// A context done in the middle of a long write stops it as the data goes
// to disk: the temporary file is removed and the target keeps its content.
func TestOutputSetCancelledMidWrite(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "audit.parquet")
	if err := os.WriteFile(path, []byte("old\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	s := NewOutputSet(ctx)
	err := s.Add(path, func(w io.Writer) error {
		chunk := strings.Repeat("x", 1<<10)
		for i := 0; i < 1<<12; i++ {
			if i == 10 {
				cancel()
			}
			if _, err := io.WriteString(w, chunk); err != nil {
				return err
			}
		}
		return nil
	})
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("error %v, want context.Canceled", err)
	}
	if got := readOrNone(t, path); got != "old\n" {
		t.Errorf("the target holds %.20q, want its old content", got)
	}
	if names := dirNames(t, dir); len(names) != 1 {
		t.Errorf("the folder holds %q, want only the target", names)
	}
}
