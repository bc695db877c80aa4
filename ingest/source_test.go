package ingest

import (
	"errors"
	"io/fs"
	"os"
	"path/filepath"
	"testing"
)

func TestFileSources(t *testing.T) {
	dir := t.TempDir()
	for _, f := range []string{"b/2.parquet", "b/1.CSV", "a.parq", "notes.txt", "c/d/3.csv"} {
		p := filepath.Join(dir, filepath.FromSlash(f))
		if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, nil, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	srcs, err := FileSources([]string{filepath.Join(dir, "c", "d", "3.csv"), dir})
	if err != nil {
		t.Fatal(err)
	}
	// Files named directly first, in the order given; a folder's files
	// sorted by path; other extensions skipped.
	want := []string{"c/d/3.csv", "a.parq", "b/1.CSV", "b/2.parquet", "c/d/3.csv"}
	var got []string
	for _, s := range srcs {
		rel, _ := filepath.Rel(dir, s.Name)
		got = append(got, filepath.ToSlash(rel))
	}
	if len(got) != len(want) {
		t.Fatalf("got %v, want %v", got, want)
	}
	for i := range want {
		if got[i] != want[i] {
			t.Fatalf("got %v, want %v", got, want)
		}
	}

	if _, err := FileSources([]string{filepath.Join(dir, "missing.csv")}); !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("missing file: error %v, want fs.ErrNotExist", err)
	}
	notes := filepath.Join(dir, "notes.txt")
	if _, err := FileSources([]string{notes}); err == nil || err.Error() != notes+": unknown file type (want .csv, .parquet or .parq)" {
		t.Errorf("unknown extension: error %v", err)
	}
}
