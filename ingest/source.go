package ingest

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"net/url"
	"os"
	"path/filepath"
	"sort"
	"strings"
)

// fileFormat is the file format of a source, decided by its name's extension.
type fileFormat int

const (
	formatCSV fileFormat = iota + 1
	formatParquet
)

// knownTypes lists the extensions in error messages.
const knownTypes = ".csv, .csv.gz, .parquet or .parq"

// formatOf returns the format of a file name and whether it is
// gzip-compressed (.csv.gz).
func formatOf(name string) (f fileFormat, gzipped bool, ok bool) {
	lower := strings.ToLower(name)
	switch {
	case strings.HasSuffix(lower, ".csv.gz"):
		return formatCSV, true, true
	case strings.HasSuffix(lower, ".csv"):
		return formatCSV, false, true
	case strings.HasSuffix(lower, ".parquet"), strings.HasSuffix(lower, ".parq"):
		return formatParquet, false, true
	}
	return 0, false, false
}

// Partition is one key=value folder name of a Hive-style partitioned layout,
// such as dt=2026-11-30 in exports/dt=2026-11-30/country=br/part-0.parquet.
type Partition struct {
	Key string
	// Value is the folder name after the first '=', with %XX escapes
	// decoded. The folder name a Hive-style writer uses for a null value,
	// __HIVE_DEFAULT_PARTITION__, gives "" (null).
	Value string
}

// hiveNull is the partition value Hive-style writers use for null.
const hiveNull = "__HIVE_DEFAULT_PARTITION__"

// Source is one named input: a file on disk or bytes held in memory. Its
// format comes from the end of Name, in any case: .csv, .csv.gz (CSV
// compressed with gzip, one member or several concatenated), .parquet or
// .parq.
type Source struct {
	// Name is the path of a file, or the name of in-memory data; errors
	// use it as the file name.
	Name string
	// Partitions are the key=value folder names between the folder or
	// pattern root given to FileSources and the file, outermost first.
	// A Mapping may name a key as a column: every row of the file then
	// has that value (see Mapping).
	Partitions []Partition

	data    []byte // in-memory contents; nil for a file
	inMem   bool
	kind    fileFormat
	gzipped bool
}

// BytesSource returns a source that reads data, named name. The format comes
// from name's extension; NewReader reports an unknown one. data must not be
// changed while a Reader uses it. Set Partitions on the result to give the
// source partition values.
func BytesSource(name string, data []byte) Source {
	f, gz, _ := formatOf(name)
	return Source{Name: name, data: data, inMem: true, kind: f, gzipped: gz}
}

// FileSources returns the sources named by paths, in order. Each path is
//
//   - a file, which must have a known extension (.csv, .csv.gz, .parquet or
//     .parq); it has no partitions;
//   - a folder, walked recursively: its files with a known extension,
//     sorted by path (other files are skipped);
//   - a pattern in filepath.Match syntax (*, ?, [...]), when no file of
//     that exact name exists: the files and folders it matches, sorted by
//     path, each folder walked as above; matched files with another
//     extension are skipped. A pattern that matches no file with a known
//     extension is an error naming it.
//
// Below a folder, or below the pattern's leading folders that hold no
// pattern characters, names starting with '.' or '_' are skipped, files and
// folders alike: writers keep temporary files, checksums and markers there
// (_temporary/, _SUCCESS, .part-0.parquet.crc). Folder names of the form
// key=value on the way down become the file's Partitions; a key that
// appears twice on one path is an error.
//
// A file named twice (directly and through a folder, say) is listed twice.
// FileSources does not open the files.
func FileSources(paths []string) ([]Source, error) {
	var out []Source
	for _, p := range paths {
		info, err := os.Stat(p)
		if err != nil && isPattern(p) {
			found, err := globSources(p)
			if err != nil {
				return nil, err
			}
			out = append(out, found...)
			continue
		}
		if err != nil {
			return nil, err // *fs.PathError names the path
		}
		if !info.IsDir() {
			f, gz, ok := formatOf(p)
			if !ok {
				return nil, fmt.Errorf("%s: unknown file type (want %s)", p, knownTypes)
			}
			out = append(out, Source{Name: p, kind: f, gzipped: gz})
			continue
		}
		found, err := walkSources(p, p)
		if err != nil {
			return nil, err
		}
		out = append(out, found...)
	}
	return out, nil
}

// isPattern reports whether p holds filepath.Match's special characters.
func isPattern(p string) bool {
	return strings.ContainsAny(p, `*?[`) || (filepath.Separator != '\\' && strings.Contains(p, `\`))
}

// globSources expands a pattern; see FileSources.
func globSources(pattern string) ([]Source, error) {
	matches, err := filepath.Glob(pattern)
	if err != nil {
		return nil, fmt.Errorf("%s: bad pattern: %w", pattern, err)
	}
	root := patternRoot(pattern)
	sort.Strings(matches)
	var out []Source
	for _, m := range matches {
		if hiddenBelow(root, m) {
			continue
		}
		info, err := os.Stat(m)
		if err != nil {
			return nil, err
		}
		if info.IsDir() {
			found, err := walkSources(root, m)
			if err != nil {
				return nil, err
			}
			out = append(out, found...)
			continue
		}
		s, ok, err := sourceBelow(root, m)
		if err != nil {
			return nil, err
		}
		if ok {
			out = append(out, s)
		}
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("%s: pattern matches no %s file", pattern, knownTypes)
	}
	sort.SliceStable(out, func(i, j int) bool { return out[i].Name < out[j].Name })
	return out, nil
}

// patternRoot returns the leading folders of pattern that hold no pattern
// characters: "exports" for "exports/dt=*/part-*.parquet", "." for "*.csv".
func patternRoot(pattern string) string {
	dir := filepath.Dir(pattern)
	for isPattern(dir) {
		dir = filepath.Dir(dir)
	}
	return dir
}

// walkSources lists the files below dir; partitions are taken from the
// folders below root (root is dir or one of its parents).
func walkSources(root, dir string) ([]Source, error) {
	var found []Source
	err := filepath.WalkDir(dir, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if path != dir && hidden(d.Name()) {
			if d.IsDir() {
				return filepath.SkipDir
			}
			return nil
		}
		if d.IsDir() {
			return nil
		}
		s, ok, err := sourceBelow(root, path)
		if ok {
			found = append(found, s)
		}
		return err
	})
	if err != nil {
		return nil, err
	}
	sort.Slice(found, func(i, j int) bool { return found[i].Name < found[j].Name })
	return found, nil
}

func hidden(name string) bool { return strings.HasPrefix(name, ".") || strings.HasPrefix(name, "_") }

// hiddenBelow reports whether a name on path below root is hidden.
func hiddenBelow(root, path string) bool {
	rel, err := filepath.Rel(root, path)
	if err != nil {
		return false
	}
	for _, seg := range strings.Split(rel, string(filepath.Separator)) {
		if seg != "." && seg != ".." && hidden(seg) {
			return true
		}
	}
	return false
}

// sourceBelow returns the source for a file found below root, or false when
// its extension is not one armtally reads.
func sourceBelow(root, path string) (Source, bool, error) {
	f, gz, ok := formatOf(path)
	if !ok {
		return Source{}, false, nil
	}
	parts, err := partitionsOf(root, path)
	if err != nil {
		return Source{}, false, err
	}
	return Source{Name: path, Partitions: parts, kind: f, gzipped: gz}, true, nil
}

// errPartition marks a path with a partition key twice or a bad escape.
var errPartition = errors.New("bad partition folder")

// partitionsOf parses the key=value folder names between root and the file.
func partitionsOf(root, path string) ([]Partition, error) {
	rel, err := filepath.Rel(root, filepath.Dir(path))
	if err != nil || rel == "." {
		return nil, nil
	}
	var parts []Partition
	for _, seg := range strings.Split(rel, string(filepath.Separator)) {
		key, val, ok := strings.Cut(seg, "=")
		if !ok || key == "" {
			continue
		}
		k, err1 := url.PathUnescape(key)
		v, err2 := url.PathUnescape(val)
		if err1 != nil || err2 != nil {
			return nil, fmt.Errorf("%s: %w: %q has a malformed %%XX escape", path, errPartition, seg)
		}
		for _, p := range parts {
			if p.Key == k {
				return nil, fmt.Errorf("%s: %w: key %q appears twice", path, errPartition, k)
			}
		}
		if v == hiveNull {
			v = ""
		}
		parts = append(parts, Partition{Key: k, Value: v})
	}
	return parts, nil
}

// partition returns the value of the partition key, if the source has it.
func (s Source) partition(key string) (string, bool) {
	for _, p := range s.Partitions {
		if p.Key == key {
			return p.Value, true
		}
	}
	return "", false
}

func (s Source) partitionKeys() []string {
	keys := make([]string, len(s.Partitions))
	for i, p := range s.Partitions {
		keys[i] = p.Key
	}
	return keys
}

// openedSource is a source opened for reading.
type openedSource struct {
	r    io.ReaderAt
	size int64
	c    io.Closer // nil for in-memory data
}

func (s Source) open() (*openedSource, error) {
	if s.inMem {
		return &openedSource{r: bytes.NewReader(s.data), size: int64(len(s.data))}, nil
	}
	f, err := os.Open(s.Name)
	if err != nil {
		return nil, err
	}
	info, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, err
	}
	return &openedSource{r: f, size: info.Size(), c: f}, nil
}

func (o *openedSource) Close() error {
	if o.c == nil {
		return nil
	}
	return o.c.Close()
}
