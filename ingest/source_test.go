package ingest

import (
	"errors"
	"fmt"
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
	if _, err := FileSources([]string{notes}); err == nil || err.Error() != notes+": unknown file type (want .csv, .csv.gz, .parquet or .parq)" {
		t.Errorf("unknown extension: error %v", err)
	}
}

// writeFiles creates each file below dir with its contents.
func writeFiles(t *testing.T, dir string, files map[string][]byte) {
	t.Helper()
	for name, data := range files {
		p := filepath.Join(dir, filepath.FromSlash(name))
		if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
}

// describe writes each source as its path below dir and its partitions.
func describe(t *testing.T, dir string, srcs []Source) []string {
	t.Helper()
	var out []string
	for _, s := range srcs {
		rel, err := filepath.Rel(dir, s.Name)
		if err != nil {
			t.Fatal(err)
		}
		d := filepath.ToSlash(rel)
		for _, p := range s.Partitions {
			d += fmt.Sprintf(" %s=%q", p.Key, p.Value)
		}
		out = append(out, d)
	}
	return out
}

func TestFileSourcesPartitions(t *testing.T) {
	dir := t.TempDir()
	writeFiles(t, dir, map[string][]byte{
		"exports/dt=2026-11-30/country=br/part-0.parquet":                nil,
		"exports/dt=2026-11-30/country=br/part-1.csv.gz":                 nil,
		"exports/dt=2026-11-30/country=br/.part-0.parquet.crc":           nil, // hidden: skipped
		"exports/dt=2026-11-30/country=br/_SUCCESS":                      nil, // marker: skipped
		"exports/dt=2026-11-30/country=a%2Fb/part-0.csv":                 nil, // %2F is '/'
		"exports/dt=2026-11-30/country=__HIVE_DEFAULT_PARTITION__/p.csv": nil,
		"exports/dt=2026-12-01/country=de/part-0.CSV":                    nil,
		"exports/dt=2026-12-01/notes.txt":                                nil, // other extension: skipped
		"exports/_temporary/0/part-9.parquet":                            nil, // temporary: skipped
		"exports/plain/x.csv":                                            nil, // a folder that is no partition
	})
	exports := filepath.Join(dir, "exports")
	tests := []struct {
		name  string
		paths []string
		want  []string // relative to dir, with partitions; hand-listed from the tree above
	}{
		{"folder", []string{exports}, []string{
			`exports/dt=2026-11-30/country=__HIVE_DEFAULT_PARTITION__/p.csv dt="2026-11-30" country=""`,
			`exports/dt=2026-11-30/country=a%2Fb/part-0.csv dt="2026-11-30" country="a/b"`,
			`exports/dt=2026-11-30/country=br/part-0.parquet dt="2026-11-30" country="br"`,
			`exports/dt=2026-11-30/country=br/part-1.csv.gz dt="2026-11-30" country="br"`,
			`exports/dt=2026-12-01/country=de/part-0.CSV dt="2026-12-01" country="de"`,
			`exports/plain/x.csv`,
		}},
		// Partitions come from below the folder named: dt is above it.
		{"partition folder", []string{filepath.Join(exports, "dt=2026-12-01")}, []string{
			`exports/dt=2026-12-01/country=de/part-0.CSV country="de"`,
		}},
		// The pattern's root is exports/, so dt and country are both
		// below it.
		{"pattern of files", []string{filepath.Join(exports, "dt=*", "country=br", "*")}, []string{
			`exports/dt=2026-11-30/country=br/part-0.parquet dt="2026-11-30" country="br"`,
			`exports/dt=2026-11-30/country=br/part-1.csv.gz dt="2026-11-30" country="br"`,
		}},
		{"pattern of folders", []string{filepath.Join(exports, "dt=2026-12-0?")}, []string{
			`exports/dt=2026-12-01/country=de/part-0.CSV dt="2026-12-01" country="de"`,
		}},
		// A file named directly has no partitions.
		{"file", []string{filepath.Join(exports, "dt=2026-12-01", "country=de", "part-0.CSV")}, []string{
			`exports/dt=2026-12-01/country=de/part-0.CSV`,
		}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			srcs, err := FileSources(tc.paths)
			if err != nil {
				t.Fatal(err)
			}
			equalRows(t, describe(t, dir, srcs), tc.want)
		})
	}
}

func TestFileSourcesErrors(t *testing.T) {
	dir := t.TempDir()
	writeFiles(t, dir, map[string][]byte{
		"a/dt=1/x/dt=2/f.csv": nil,
		"b/k=%zz/f.csv":       nil,
		"c/notes.txt":         nil,
	})
	tests := []struct {
		name string
		path string
		is   error
		msg  string // the error text after dir
	}{
		{"pattern matches nothing", "nothing*.csv", nil,
			"/nothing*.csv: pattern matches no .csv, .csv.gz, .parquet or .parq file"},
		{"pattern matches no data file", "c/*", nil,
			"/c/*: pattern matches no .csv, .csv.gz, .parquet or .parq file"},
		{"bad pattern", "[", filepath.ErrBadPattern, "/[: bad pattern: syntax error in pattern"},
		{"key twice", "a", errPartition, `/a/dt=1/x/dt=2/f.csv: bad partition folder: key "dt" appears twice`},
		{"bad escape", "b", errPartition, `/b/k=%zz/f.csv: bad partition folder: "k=%zz" has a malformed %XX escape`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := FileSources([]string{filepath.Join(dir, tc.path)})
			if err == nil || err.Error() != dir+tc.msg {
				t.Errorf("error %v, want %s", err, dir+tc.msg)
			}
			if tc.is != nil && !errors.Is(err, tc.is) {
				t.Errorf("error %v, want errors.Is %v", err, tc.is)
			}
		})
	}
}

// A file whose name holds pattern characters is read as that file.
func TestFileSourcesLiteralBrackets(t *testing.T) {
	dir := t.TempDir()
	writeFiles(t, dir, map[string][]byte{"e[1].csv": nil})
	srcs, err := FileSources([]string{filepath.Join(dir, "e[1].csv")})
	if err != nil || len(srcs) != 1 || filepath.Base(srcs[0].Name) != "e[1].csv" {
		t.Errorf("got %v, %v; want the one file e[1].csv", srcs, err)
	}
}
