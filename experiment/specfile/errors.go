package specfile

import (
	"fmt"
	"strings"
)

// Error is a problem with a spec file: the file, the line (0 when
// unknown), the column (0 when unknown), the key and what is wrong.
type Error struct {
	File      string
	Line, Col int
	Key       string
	Msg       string
}

// Error returns "FILE:LINE:COL: KEY: MSG", leaving out what is unknown.
func (e *Error) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Line > 0 {
		fmt.Fprintf(&b, ":%d", e.Line)
		if e.Col > 0 {
			fmt.Fprintf(&b, ":%d", e.Col)
		}
	}
	b.WriteString(": ")
	if e.Key != "" {
		b.WriteString(shorten(e.Key, maxKeyLen))
		b.WriteString(": ")
	}
	b.WriteString(shorten(e.Msg, maxMsgLen))
	return b.String()
}

// Errors is several spec-file errors at once (every unknown key, say).
type Errors []*Error

// Error returns one line per error, as many as fit in about 900 bytes,
// then a line that says how many more there are.
func (es Errors) Error() string {
	lines := make([]string, len(es))
	for i, e := range es {
		lines[i] = e.Error()
	}
	if len(es) == 0 {
		return ""
	}
	return joinShort(es[0].File, lines)
}

// FlagError is a problem with a setting that no spec file gave: one from a
// command-line flag, or a default. Its text names the flag, as in
// "--alpha: 0.7 is not strictly between 0 and 0.5"; a command prints it as
// a usage error.
type FlagError struct {
	Msg string
}

func (e *FlagError) Error() string { return e.Msg }

func flagErrorf(format string, args ...any) error {
	return &FlagError{Msg: fmt.Sprintf(format, args...)}
}
