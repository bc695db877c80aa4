package ingest

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"net/url"
	"os"
	"path"
	"path/filepath"
	"sort"
	"strings"
	"time"
	"unicode/utf8"
)

// Format is the file format of a source, decided by its name's extension;
// 0 for an unknown extension.
type Format int

// The formats.
const (
	FormatCSV     Format = iota + 1 // .csv or .csv.gz
	FormatParquet                   // .parquet or .parq
)

// knownTypes lists the extensions in error messages.
const knownTypes = ".csv, .csv.gz, .parquet or .parq"

// formatOf returns the format of a file name. Whether a CSV file is
// gzip-compressed is decided by its contents when it is opened.
func formatOf(name string) (Format, bool) {
	lower := strings.ToLower(name)
	switch {
	case strings.HasSuffix(lower, ".csv.gz"), strings.HasSuffix(lower, ".csv"):
		return FormatCSV, true
	case strings.HasSuffix(lower, ".parquet"), strings.HasSuffix(lower, ".parq"):
		return FormatParquet, true
	}
	return 0, false
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

// Source is one named input: a file on disk, a file of an fs.FS or bytes
// held in memory. Its format comes from the end of Name, in any case: .csv
// or .csv.gz (CSV), .parquet or .parq. A CSV source whose first two bytes
// are gzip's magic number (0x1f 0x8b) is decompressed, whatever its name
// (one member or several concatenated). When a reader opens it, its bytes
// are checked against the format: a CSV source holding Parquet data, or a
// Parquet source holding something else, is refused with ErrFormat saying
// what it holds, and a Parquet file cut short is reported as truncated
// (ErrCorrupt).
type Source struct {
	// Name is the path of a file (for FSSources, its path inside the
	// fs.FS), or the name of in-memory data; errors use it as the file
	// name.
	Name string
	// Partitions are the key=value folder names between the folder or
	// pattern root given to FileSources or FSSources and the file,
	// outermost first. A Mapping may name a key as a column: every row of
	// the file then has that value (see Mapping).
	Partitions []Partition

	data  []byte // in-memory contents; nil for a file
	inMem bool
	fsys  fs.FS // the file system of a source from FSSources
	kind  Format
}

// BytesSource returns a source that reads data, named name. The format comes
// from name's extension; NewReader reports an unknown one. data must not be
// changed while a Reader uses it. Set Partitions on the result to give the
// source partition values.
func BytesSource(name string, data []byte) Source {
	f, _ := formatOf(name)
	return Source{Name: name, data: data, inMem: true, kind: f}
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
	return tree{}.sources(paths)
}

// FSSources returns the sources named by patterns inside fsys, by the rules
// of FileSources with fs.FS paths (slash-separated, unrooted, no "..";
// patterns in path.Match syntax): files, folders walked recursively and
// patterns, with the same extensions, hidden names and key=value partition
// folders. No patterns means ".", every file of fsys. Each source's Name is
// its path inside fsys; the sources read fsys when opened, so it must stay
// usable while a reader uses them.
func FSSources(fsys fs.FS, patterns ...string) ([]Source, error) {
	if len(patterns) == 0 {
		patterns = []string{"."}
	}
	return tree{fsys: fsys}.sources(patterns)
}

// tree is the file system that FileSources (the operating system's, with
// filepath's rules) or FSSources (an fs.FS, with path's rules) walks.
type tree struct {
	fsys fs.FS // nil: the operating system's
}

func (t tree) stat(name string) (fs.FileInfo, error) {
	if t.fsys == nil {
		return os.Stat(name)
	}
	return fs.Stat(t.fsys, name)
}

func (t tree) glob(pattern string) ([]string, error) {
	if t.fsys == nil {
		return filepath.Glob(pattern)
	}
	return fs.Glob(t.fsys, pattern)
}

func (t tree) walk(root string, fn fs.WalkDirFunc) error {
	if t.fsys == nil {
		return filepath.WalkDir(root, fn)
	}
	return fs.WalkDir(t.fsys, root, fn)
}

func (t tree) dir(name string) string {
	if t.fsys == nil {
		return filepath.Dir(name)
	}
	return path.Dir(name)
}

// segments returns the names on the way from base down to target, or
// false when target is not below base.
func (t tree) segments(base, target string) ([]string, bool) {
	if t.fsys == nil {
		rel, err := filepath.Rel(base, target)
		if err != nil {
			return nil, false
		}
		return strings.Split(rel, string(filepath.Separator)), true
	}
	switch {
	case target == base:
		return []string{"."}, true
	case base == ".":
		return strings.Split(target, "/"), true
	case strings.HasPrefix(target, base+"/"):
		return strings.Split(target[len(base)+1:], "/"), true
	}
	return nil, false
}

// isPattern reports whether p holds the pattern characters of Match.
func (t tree) isPattern(p string) bool {
	return strings.ContainsAny(p, `*?[`) || ((t.fsys != nil || filepath.Separator != '\\') && strings.Contains(p, `\`))
}

// sources lists the sources of paths; see FileSources.
func (t tree) sources(paths []string) ([]Source, error) {
	var out []Source
	for _, p := range paths {
		info, err := t.stat(p)
		if err != nil && t.isPattern(p) {
			found, err := t.globSources(p)
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
			f, ok := formatOf(p)
			if !ok {
				return nil, fmt.Errorf("%s: unknown file type (want %s)", p, knownTypes)
			}
			out = append(out, Source{Name: p, fsys: t.fsys, kind: f})
			continue
		}
		found, err := t.walkSources(p, p)
		if err != nil {
			return nil, err
		}
		out = append(out, found...)
	}
	return out, nil
}

// globSources expands a pattern; see FileSources.
func (t tree) globSources(pattern string) ([]Source, error) {
	matches, err := t.glob(pattern)
	if err != nil {
		return nil, fmt.Errorf("%s: bad pattern: %w", pattern, err)
	}
	root := t.patternRoot(pattern)
	sort.Strings(matches)
	var out []Source
	for _, m := range matches {
		if t.hiddenBelow(root, m) {
			continue
		}
		info, err := t.stat(m)
		if err != nil {
			return nil, err
		}
		if info.IsDir() {
			found, err := t.walkSources(root, m)
			if err != nil {
				return nil, err
			}
			out = append(out, found...)
			continue
		}
		s, ok, err := t.sourceBelow(root, m)
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
func (t tree) patternRoot(pattern string) string {
	dir := t.dir(pattern)
	for t.isPattern(dir) {
		dir = t.dir(dir)
	}
	return dir
}

// walkSources lists the files below dir; partitions are taken from the
// folders below root (root is dir or one of its parents).
func (t tree) walkSources(root, dir string) ([]Source, error) {
	var found []Source
	err := t.walk(dir, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if path != dir && hidden(d.Name()) {
			if d.IsDir() {
				return fs.SkipDir
			}
			return nil
		}
		if d.IsDir() {
			return nil
		}
		s, ok, err := t.sourceBelow(root, path)
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
func (t tree) hiddenBelow(root, path string) bool {
	segs, _ := t.segments(root, path)
	for _, seg := range segs {
		if seg != "." && seg != ".." && hidden(seg) {
			return true
		}
	}
	return false
}

// sourceBelow returns the source for a file found below root, or false when
// its extension is not one armtally reads.
func (t tree) sourceBelow(root, path string) (Source, bool, error) {
	f, ok := formatOf(path)
	if !ok {
		return Source{}, false, nil
	}
	parts, err := t.partitionsOf(root, path)
	if err != nil {
		return Source{}, false, err
	}
	return Source{Name: path, Partitions: parts, fsys: t.fsys, kind: f}, true, nil
}

// errPartition marks a path with a partition key twice or a bad escape.
var errPartition = errors.New("bad partition folder")

// partitionsOf parses the key=value folder names between root and the file.
func (t tree) partitionsOf(root, path string) ([]Partition, error) {
	segs, ok := t.segments(root, t.dir(path))
	if !ok || (len(segs) == 1 && segs[0] == ".") {
		return nil, nil
	}
	var parts []Partition
	for _, seg := range segs {
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

// Format returns the source's format, by the end of its name; 0 when that
// is none of the known extensions.
func (s Source) Format() Format { return s.kind }

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

// Stat returns the size and modification time of the source: of the file
// on disk or in its fs.FS; in-memory data has a zero time. Errors name the
// file.
func (s Source) Stat() (size int64, modTime time.Time, err error) {
	if s.inMem {
		return int64(len(s.data)), time.Time{}, nil
	}
	var info fs.FileInfo
	if s.fsys != nil {
		info, err = fs.Stat(s.fsys, s.Name)
	} else {
		info, err = os.Stat(s.Name)
	}
	if err != nil {
		return 0, time.Time{}, err // *fs.PathError names the file
	}
	return info.Size(), info.ModTime(), nil
}

// Open opens the source for reading: r reads its bytes, of which there are
// size; close c when done (c is never nil). Errors name the file. A file of
// an fs.FS that does not implement io.ReaderAt is read into memory whole.
func (s Source) Open() (r io.ReaderAt, size int64, c io.Closer, err error) {
	if s.inMem {
		return bytes.NewReader(s.data), int64(len(s.data)), io.NopCloser(nil), nil
	}
	var f fs.File
	if s.fsys != nil {
		f, err = s.fsys.Open(s.Name)
	} else {
		f, err = os.Open(s.Name)
	}
	if err != nil {
		return nil, 0, nil, err // *fs.PathError names the file
	}
	info, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, 0, nil, err
	}
	if ra, ok := f.(io.ReaderAt); ok {
		return ra, info.Size(), f, nil
	}
	data, err := io.ReadAll(f)
	f.Close()
	if err != nil {
		return nil, 0, nil, fmt.Errorf("%s: %w", s.Name, err)
	}
	return bytes.NewReader(data), int64(len(data)), io.NopCloser(nil), nil
}

// openedSource is a source opened for reading.
type openedSource struct {
	r    io.ReaderAt
	size int64
	c    io.Closer
}

// open opens the source and checks its first bytes against its format
// (checkContent); errors name the file.
func (s Source) open() (*openedSource, error) {
	r, size, c, err := s.Open()
	if err != nil {
		return nil, err
	}
	if err := checkContent(s.kind, r, size); err != nil {
		c.Close()
		return nil, fmt.Errorf("%s: %w", s.Name, err)
	}
	return &openedSource{r: r, size: size, c: c}, nil
}

// ErrFormat: a file's contents are not of the format its name gives (a
// file named as CSV that holds Parquet data, or one named as Parquet that
// holds text or gzip data). The name decides how a file is read; the
// error says what the file holds instead, so that it can be renamed.
var ErrFormat = errors.New("contents do not match the file name")

// contentError is an error about what a file's bytes are; errors.Is
// matches it with is (ErrFormat or ErrCorrupt).
type contentError struct {
	is  error
	msg string
}

func (e *contentError) Error() string        { return e.msg }
func (e *contentError) Is(target error) bool { return target == e.is }

// checkContent checks the bytes of a source against its format: a CSV
// source must not start with Parquet's magic number "PAR1" (gzip data is
// decompressed whatever the name, see CSVFile), and a Parquet source must
// have Parquet's magic at both ends and a footer inside the file
// (checkParquetBytes).
func checkContent(kind Format, r io.ReaderAt, size int64) error {
	switch kind {
	case FormatParquet:
		return checkParquetBytes(r, size)
	case FormatCSV:
		var head [4]byte
		if n, _ := r.ReadAt(head[:], 0); n == len(head) && parquetMagic(string(head[:])) {
			return &contentError{ErrFormat, "not a CSV file: it holds Parquet data (it starts with " +
				string(head[:]) + "); name it .parquet or .parq"}
		}
	}
	return nil
}

// describeContent says what the first bytes of a file that is not Parquet
// look like, for the error: empty, gzip data, text (quoted, up to 32 bytes
// of its first line) or other bytes (up to 8, in hex).
func describeContent(r io.ReaderAt, size int64) string {
	if size == 0 {
		return "the file is empty"
	}
	var buf [64]byte
	n, _ := r.ReadAt(buf[:min(size, int64(len(buf)))], 0)
	b := buf[:n]
	if len(b) >= 2 && [2]byte(b[:2]) == gzipMagic {
		return "it holds gzip-compressed data (compressed CSV is named .csv or .csv.gz)"
	}
	if line, ok := textStart(b, n == len(buf)); ok {
		return fmt.Sprintf("it holds text starting %q (CSV is named .csv)", line)
	}
	return fmt.Sprintf("it starts with the bytes % x, not PAR1", b[:min(len(b), 8)])
}

// textStart returns up to 32 bytes of the first line of b when b is text:
// valid UTF-8 (cut is true when b may end inside a character) without
// control characters other than tab, CR and LF.
func textStart(b []byte, cut bool) (string, bool) {
	for i := 0; i < len(b); {
		r, w := utf8.DecodeRune(b[i:])
		if r == utf8.RuneError && w <= 1 {
			if cut && len(b)-i < utf8.UTFMax {
				b = b[:i]
				break
			}
			return "", false
		}
		if r < 0x20 && r != '\t' && r != '\r' && r != '\n' || r == 0x7f {
			return "", false
		}
		i += w
	}
	line, _, _ := bytes.Cut(b, []byte("\n"))
	line = bytes.TrimSuffix(line, []byte("\r"))
	if len(line) > 32 {
		line = line[:32]
		for len(line) > 0 && !utf8.Valid(line) {
			line = line[:len(line)-1]
		}
	}
	return string(line), true
}

func (o *openedSource) Close() error { return o.c.Close() }

// IsInputName reports whether a folder walk of FileSources would read a
// file of this name: its extension is one of the known formats and it
// does not start with '.' or '_'.
func IsInputName(name string) bool {
	base := filepath.Base(name)
	if strings.HasPrefix(base, ".") || strings.HasPrefix(base, "_") {
		return false
	}
	_, ok := formatOf(base)
	return ok
}
