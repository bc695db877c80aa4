package ingest

import (
	"bytes"
	"fmt"
	"io"
	"io/fs"
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

func formatOf(name string) (fileFormat, bool) {
	switch strings.ToLower(filepath.Ext(name)) {
	case ".csv":
		return formatCSV, true
	case ".parquet", ".parq":
		return formatParquet, true
	}
	return 0, false
}

// Source is one named input: a file on disk or bytes held in memory. Its
// format (CSV or Parquet) comes from the extension of Name: .csv, .parquet
// or .parq, in any case.
type Source struct {
	// Name is the path of a file, or the name of in-memory data; errors
	// use it as the file name.
	Name string

	data  []byte // in-memory contents; nil for a file
	inMem bool
	kind  fileFormat
}

// BytesSource returns a source that reads data, named name. The format comes
// from name's extension; NewReader reports an unknown one. data must not be
// changed while a Reader uses it.
func BytesSource(name string, data []byte) Source {
	f, _ := formatOf(name)
	return Source{Name: name, data: data, inMem: true, kind: f}
}

// FileSources returns one source per file. A path that is a folder is walked
// recursively and contributes its *.csv, *.parquet and *.parq files (other
// files in it are skipped), sorted by path so that the order is the same on
// every run. Files named directly keep the order given. A path that does not
// exist, or a file named directly with another extension, is an error.
// FileSources does not open the files.
func FileSources(paths []string) ([]Source, error) {
	var out []Source
	for _, p := range paths {
		info, err := os.Stat(p)
		if err != nil {
			return nil, err // *fs.PathError names the path
		}
		if !info.IsDir() {
			f, ok := formatOf(p)
			if !ok {
				return nil, fmt.Errorf("%s: unknown file type (want .csv, .parquet or .parq)", p)
			}
			out = append(out, Source{Name: p, kind: f})
			continue
		}
		var found []Source
		err = filepath.WalkDir(p, func(path string, d fs.DirEntry, err error) error {
			if err != nil {
				return err
			}
			if d.IsDir() {
				return nil
			}
			if f, ok := formatOf(path); ok {
				found = append(found, Source{Name: path, kind: f})
			}
			return nil
		})
		if err != nil {
			return nil, err
		}
		sort.Slice(found, func(i, j int) bool { return found[i].Name < found[j].Name })
		out = append(out, found...)
	}
	return out, nil
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
