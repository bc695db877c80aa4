package report

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
)

// OutputPath is one file a run will write and what named it (a flag or a
// spec-file key), for the messages of CheckOutputPaths.
type OutputPath struct {
	From string
	Path string
}

// CheckOutputPaths refuses, before any input is read, the outputs that
// would lose data or fail after the analysis: an output that is one of
// the inputs, the same file as another output, a folder, or in a folder
// that is missing or cannot be written to. Symbolic links are followed,
// so a link to an input is an input; a device or a pipe (/dev/null) is
// written directly and may be named more than once. The error's text
// names the output by its From.
func CheckOutputPaths(outputs []OutputPath, inputs []string) error {
	var inputInfos []os.FileInfo
	seen := map[string]OutputPath{}
	var written []OutputPath
	var writtenInfos []os.FileInfo
	for _, o := range outputs {
		target, err := ResolveOutput(o.Path)
		if errors.Is(err, fs.ErrNotExist) {
			return fmt.Errorf("%s %s: the folder to write it in does not exist (%v)", o.From, o.Path, err)
		}
		if err != nil {
			return fmt.Errorf("%s %s: %v", o.From, o.Path, err)
		}
		fi, statErr := os.Stat(target)
		switch {
		case statErr == nil && fi.IsDir():
			return fmt.Errorf("%s %s: is a folder; name a file", o.From, o.Path)
		case statErr == nil && !fi.Mode().IsRegular():
			continue
		}
		if prev, ok := seen[target]; ok {
			return sameFile(prev, o)
		}
		seen[target] = o
		if err := checkWritable(filepath.Dir(target)); err != nil {
			return fmt.Errorf("%s %s: cannot write in its folder: %v", o.From, o.Path, err)
		}
		if statErr != nil {
			continue
		}
		// An existing file: it may be an input or another output under
		// another name (a hard link).
		for i, prev := range writtenInfos {
			if os.SameFile(fi, prev) {
				return sameFile(written[i], o)
			}
		}
		written, writtenInfos = append(written, o), append(writtenInfos, fi)
		if inputInfos == nil {
			inputInfos = make([]os.FileInfo, len(inputs))
			for i, in := range inputs {
				inputInfos[i], _ = os.Stat(in)
			}
		}
		for i, in := range inputInfos {
			if in != nil && os.SameFile(fi, in) {
				return fmt.Errorf("%s %s is an input of the run (%s); writing it would destroy it", o.From, o.Path, inputs[i])
			}
		}
	}
	return nil
}

func sameFile(a, b OutputPath) error {
	return fmt.Errorf("%s %s and %s %s are the same file: each output needs its own", a.From, a.Path, b.From, b.Path)
}

// checkWritable says whether a file can be made in dir, by making one
// and removing it.
func checkWritable(dir string) error {
	f, err := os.CreateTemp(dir, ".armtally-check-*")
	if err != nil {
		var pe *fs.PathError
		if errors.As(err, &pe) {
			return pe.Err
		}
		return err
	}
	name := f.Name()
	f.Close()
	return os.Remove(name)
}
