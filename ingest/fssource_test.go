package ingest

import (
	"errors"
	"io"
	"io/fs"
	"os"
	"path"
	"path/filepath"
	"strings"
	"testing"
	"testing/fstest"
	"time"
)

// fsTree is a partitioned export with real data: Parquet and CSV files
// (one of them gzip-compressed), hidden files and a file of another type.
func fsTree(t *testing.T) map[string][]byte {
	type event struct {
		User  string    `parquet:"user_id"`
		TS    time.Time `parquet:"ts,timestamp(microsecond)"`
		Event string    `parquet:"event"`
	}
	pq := writeParquet(t, []event{
		{"u1", time.Date(2026, 11, 30, 8, 0, 0, 0, time.UTC), "view"},
		{"u2", time.Date(2026, 11, 30, 9, 0, 0, 0, time.UTC), "buy"},
	})
	return map[string][]byte{
		"exports/dt=2026-11-30/country=br/part-0.parquet":      pq,
		"exports/dt=2026-11-30/country=br/part-1.csv.gz":       gzipped(t, "user_id,ts,event\nu3,2026-11-30T10:00:00Z,view\n"),
		"exports/dt=2026-11-30/country=br/.part-0.parquet.crc": []byte("x"),
		"exports/dt=2026-11-30/country=a%2Fb/part-0.csv":       []byte("user_id,ts,event\nu4,2026-11-30,view\n"),
		"exports/dt=2026-12-01/country=de/part-0.CSV":          []byte("user_id,ts,event\nu5,2026-12-01,buy\n"),
		"exports/dt=2026-12-01/notes.txt":                      []byte("notes"),
		"exports/_temporary/0/part-9.parquet":                  []byte("not parquet"),
	}
}

// noReaderAt hides the ReadAt method of an fs.FS's files.
type noReaderAt struct{ fs.FS }

func (n noReaderAt) Open(name string) (fs.File, error) {
	f, err := n.FS.Open(name)
	if err != nil {
		return nil, err
	}
	if _, dir := f.(fs.ReadDirFile); dir {
		return f, nil
	}
	return struct{ fs.File }{f}, nil
}

// TestFSSources lists and reads the same tree on disk (FileSources), in
// os.DirFS, in a fstest.MapFS and in an fs.FS whose files cannot ReadAt
// (FSSources): the same files, partitions and rows each time. The expected
// sources are listed by hand from fsTree.
func TestFSSources(t *testing.T) {
	files := fsTree(t)
	dir := t.TempDir()
	writeFiles(t, dir, files)
	mapFS := fstest.MapFS{}
	for name, data := range files {
		mapFS[name] = &fstest.MapFile{Data: data}
	}
	systems := []struct {
		name string
		fsys fs.FS
	}{{"DirFS", os.DirFS(dir)}, {"MapFS", mapFS}, {"no ReadAt", noReaderAt{mapFS}}}
	all := []string{
		`exports/dt=2026-11-30/country=a%2Fb/part-0.csv dt="2026-11-30" country="a/b"`,
		`exports/dt=2026-11-30/country=br/part-0.parquet dt="2026-11-30" country="br"`,
		`exports/dt=2026-11-30/country=br/part-1.csv.gz dt="2026-11-30" country="br"`,
		`exports/dt=2026-12-01/country=de/part-0.CSV dt="2026-12-01" country="de"`,
	}
	tests := []struct {
		name     string
		patterns []string // slash-separated, relative to dir
		keys     []string // the partition keys, read as segments
		want     []string
	}{
		{"folder", []string{"exports"}, []string{"dt", "country"}, all},
		{"pattern of files", []string{"exports/dt=*/country=br/*"}, []string{"dt", "country"}, all[1:3]},
		{"pattern of folders", []string{"exports/dt=2026-12-0?"}, []string{"dt", "country"}, all[3:]},
		{"partition folder", []string{"exports/dt=2026-12-01"}, []string{"country"}, []string{`exports/dt=2026-12-01/country=de/part-0.CSV country="de"`}},
		{"file", []string{"exports/dt=2026-12-01/country=de/part-0.CSV"}, nil, []string{`exports/dt=2026-12-01/country=de/part-0.CSV`}},
	}
	for _, tc := range tests {
		m := Mapping{User: "user_id", TS: "ts", Event: "event", Segments: tc.keys}
		t.Run(tc.name, func(t *testing.T) {
			var paths []string
			for _, p := range tc.patterns {
				paths = append(paths, filepath.Join(dir, filepath.FromSlash(p)))
			}
			onDisk, err := FileSources(paths)
			if err != nil {
				t.Fatal(err)
			}
			equalRows(t, describe(t, dir, onDisk), tc.want)
			wantRows, _, err := readAll(t, onDisk, Options{Mapping: m})
			if err != nil {
				t.Fatal(err)
			}
			for _, sys := range systems {
				srcs, err := FSSources(sys.fsys, tc.patterns...)
				if err != nil {
					t.Fatalf("%s: %v", sys.name, err)
				}
				equalRows(t, describe(t, ".", srcs), tc.want)
				rows, _, err := readAll(t, srcs, Options{Mapping: m})
				if err != nil {
					t.Fatalf("%s: %v", sys.name, err)
				}
				equalRows(t, rows, wantRows)
			}
		})
	}

	// No patterns: every file of the fs.FS.
	srcs, err := FSSources(mapFS)
	if err != nil {
		t.Fatal(err)
	}
	equalRows(t, describe(t, ".", srcs), all)
}

// TestFSSourcesErrors: a missing file, a pattern that matches nothing and
// a bad pattern name what was asked for.
func TestFSSourcesErrors(t *testing.T) {
	fsys := fstest.MapFS{"a/notes.txt": {}, "b.csv": {Data: []byte("user_id,ts,event\n")}}
	if _, err := FSSources(fsys, "missing.csv"); !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("missing file: error %v, want fs.ErrNotExist", err)
	}
	if _, err := FSSources(fsys, "a/*"); err == nil || err.Error() != "a/*: pattern matches no .csv, .csv.gz, .parquet or .parq file" {
		t.Errorf("pattern matching no data file: error %v", err)
	}
	if _, err := FSSources(fsys, "["); !errors.Is(err, path.ErrBadPattern) || err.Error() != "[: bad pattern: syntax error in pattern" {
		t.Errorf("bad pattern: error %v", err)
	}
	if _, err := FSSources(fsys, "a/notes.txt"); err == nil || err.Error() != "a/notes.txt: unknown file type (want .csv, .csv.gz, .parquet or .parq)" {
		t.Errorf("unknown extension: error %v", err)
	}
}

// TestSourceOpen opens a source of each kind and reads its bytes.
func TestSourceOpen(t *testing.T) {
	dir := t.TempDir()
	writeFiles(t, dir, map[string][]byte{"d/e.csv": []byte("user_id\n")})
	fsys := fstest.MapFS{"d/e.csv": {Data: []byte("user_id\n")}}
	var srcs []Source
	for _, list := range [][]string{{filepath.Join(dir, "d")}} {
		s, err := FileSources(list)
		if err != nil {
			t.Fatal(err)
		}
		srcs = append(srcs, s...)
	}
	for _, f := range []fs.FS{fsys, noReaderAt{fsys}} {
		s, err := FSSources(f, "d")
		if err != nil {
			t.Fatal(err)
		}
		srcs = append(srcs, s...)
	}
	srcs = append(srcs, BytesSource("e.csv", []byte("user_id\n")))
	for _, s := range srcs {
		r, size, c, err := s.Open()
		if err != nil {
			t.Fatalf("%s: %v", s.Name, err)
		}
		got, err := io.ReadAll(io.NewSectionReader(r, 0, size))
		if err != nil || string(got) != "user_id\n" {
			t.Errorf("%s: read %q, %v", s.Name, got, err)
		}
		if err := c.Close(); err != nil {
			t.Errorf("%s: close: %v", s.Name, err)
		}
	}
	_, _, _, err := Source{Name: filepath.Join(dir, "missing.csv"), kind: FormatCSV}.Open()
	if !errors.Is(err, fs.ErrNotExist) || !strings.Contains(err.Error(), "missing.csv") {
		t.Errorf("missing file: error %v", err)
	}
}
