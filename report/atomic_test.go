package report

import (
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
