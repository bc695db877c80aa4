package specfile

import (
	"fmt"
	"strings"
)

// Origin says where a setting came from: a command-line flag (Flag set), a
// key of a spec file (File, Line and Key set), or neither (a default).
type Origin struct {
	Flag string // "--split"
	File string // spec file name
	Line int
	Key  string // "experiment[0].split"
}

// String names the origin as an error message starts: "--split" or
// "spec.toml:9: experiment[0].split"; "the default" for neither.
func (o Origin) String() string {
	switch {
	case o.Flag != "":
		return o.Flag
	case o.File != "":
		if o.Line > 0 {
			return fmt.Sprintf("%s:%d: %s", o.File, o.Line, o.Key)
		}
		return fmt.Sprintf("%s: %s", o.File, o.Key)
	}
	return "the default"
}

// set reports whether a flag or a file key set the setting.
func (o Origin) set() bool { return o.Flag != "" || o.File != "" }

// errorf returns an error about the setting from o: an *Error for a file
// key, a *FlagError that starts with the flag ("--split: ...") otherwise.
func (o Origin) errorf(format string, args ...any) error {
	msg := fmt.Sprintf(format, args...)
	if o.File != "" && o.Flag == "" {
		return &Error{File: o.File, Line: o.Line, Key: o.Key, Msg: msg}
	}
	name := o.Flag
	if name == "" {
		name = "the default"
	}
	return flagErrorf("%s: %s", name, msg)
}

// locator knows the line of every key of a parsed spec file, with array
// indices written out: "experiment[1].metric[0].margin".
type locator struct {
	file  string
	lines map[string]int
}

// at returns the origin of the key path.
func (l *locator) at(path string) Origin {
	return Origin{File: l.file, Line: l.line(path), Key: path}
}

// line returns the line of path, or of its nearest enclosing table that
// has one, or 0.
func (l *locator) line(path string) int {
	for p := path; p != ""; {
		if n, ok := l.lines[p]; ok {
			return n
		}
		i := strings.LastIndexAny(p, ".[")
		if i < 0 {
			break
		}
		p = p[:i]
	}
	return 0
}

// keyAt returns the indexed path of the key written at line whose path,
// indices left out, is plain; or plain itself.
func (l *locator) keyAt(line int, plain string) string {
	best := ""
	for p, n := range l.lines {
		if n == line && stripIndices(p) == plain && (best == "" || p < best) {
			best = p
		}
	}
	if best == "" {
		return plain
	}
	return best
}

// stripIndices turns "experiment[1].metric[0].name" into
// "experiment.metric.name".
func stripIndices(p string) string {
	var b strings.Builder
	skip := false
	for _, r := range p {
		switch {
		case r == '[':
			skip = true
		case r == ']':
			skip = false
		case !skip:
			b.WriteRune(r)
		}
	}
	return b.String()
}
