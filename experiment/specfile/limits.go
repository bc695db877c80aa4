package specfile

import (
	"bytes"
	"fmt"
	"io"
	"os"
	"strings"
	"unicode/utf8"

	"github.com/pelletier/go-toml/v2/unstable"
)

// MaxFileSize is the largest spec file Read accepts, 4 MiB: about 45,000
// experiments of one metric each (ReadLimit takes another limit). The
// limit is checked before the file is read whole, so that a path to a
// device or a large data file given as --spec fails at once instead of
// filling the memory.
const MaxFileSize = 4 << 20

// MaxNesting is the deepest nesting a spec file may have, counting each
// part of a table header or a dotted key and each array or inline table
// a value opens. The deepest key armtally reads, experiment.metric.events
// with its list, is 4 deep.
const MaxNesting = 16

// Messages are shortened to these lengths in bytes: a value or key taken
// from the file may be as long as the file.
const (
	maxKeyLen = 160
	maxMsgLen = 600
	// maxErrorsLen is the length beyond which Errors lists no more.
	maxErrorsLen = 900
)

// utf8BOM is the byte-order mark some editors put at the start of a UTF-8
// file; it is not part of the TOML document.
var utf8BOM = []byte{0xEF, 0xBB, 0xBF}

// readLimited reads the file at path, refusing it when it holds more than
// limit bytes.
func readLimited(path string, limit int64) ([]byte, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	msg := fmt.Sprintf("the file is larger than %d bytes, the most a spec file may hold (is it a spec file? --max-spec-size raises the limit)", limit)
	if limit == MaxFileSize {
		msg = fmt.Sprintf("the file is larger than %d MiB, the most a spec file may hold (is it a spec file? --max-spec-size raises the limit)", MaxFileSize>>20)
	}
	tooBig := &Error{File: path, Msg: msg}
	if st, err := f.Stat(); err == nil && st.Mode().IsRegular() && st.Size() > limit {
		return nil, tooBig
	}
	data, err := io.ReadAll(io.LimitReader(f, limit+1))
	if err != nil {
		return nil, err
	}
	if int64(len(data)) > limit {
		return nil, tooBig
	}
	return data, nil
}

// checkDocument refuses a document with no keys or nested deeper than
// MaxNesting. A document that does not parse is left to the decoder,
// which says where and why.
func checkDocument(name string, data []byte) error {
	const needs = "a spec file needs at least an [input] table or an [[experiment]] table"
	if len(bytes.TrimSpace(data)) == 0 {
		return &Error{File: name, Msg: "the file is empty: " + needs}
	}
	var p unstable.Parser
	p.Reset(data)
	table, keys := 0, 0
	tablePath := ""
	var unknown Errors
	for p.NextExpression() {
		e := p.Expression()
		if e.Kind != unstable.Comment {
			keys++
		}
		depth := 0
		parts, first := keyParts(e)
		switch e.Kind {
		case unstable.Table, unstable.ArrayTable:
			table = len(parts)
			depth = table
			tablePath = joinKey("", parts...)
			unknown = addUnknown(unknown, &p, name, tablePath, first)
		case unstable.KeyValue:
			depth = table + len(parts) + valueDepth(e.Value(), MaxNesting)
			unknown = addUnknown(unknown, &p, name, joinKey(tablePath, parts...), first)
		}
		if depth > MaxNesting {
			line := 0
			if first != nil {
				line = p.Shape(first.Raw).Start.Line
			}
			return &Error{File: name, Line: line, Msg: fmt.Sprintf("nested more than %d deep (tables, dotted keys, arrays and inline tables count)", MaxNesting)}
		}
	}
	if len(unknown) > maxLocated {
		// The decoder finds each unknown key's line by counting from the
		// start of the file, which takes minutes for many thousands.
		return unknown
	}
	if p.Error() == nil && keys == 0 {
		return &Error{File: name, Msg: "the file has only comments: " + needs}
	}
	return nil
}

// keyDepth counts the parts of an expression's key.
func keyDepth(n *unstable.Node) int {
	d := 0
	for it := n.Key(); it.Next(); {
		d++
	}
	return d
}

// addUnknown adds an error to list when the key path (array indices left
// out) is not a spec file key. Only the first maxLocated get a line.
func addUnknown(list Errors, p *unstable.Parser, file, path string, first *unstable.Node) Errors {
	if _, ok := specKeys[path]; ok || path == "" {
		return list
	}
	e := &Error{File: file, Key: path, Msg: "unknown key"}
	if known := knownKeys(parentKey(path)); known != "" {
		e.Msg += " (known keys here: " + known + ")"
	}
	if len(list) < maxLocated && first != nil {
		pos := p.Shape(first.Raw).Start
		e.Line, e.Col = pos.Line, pos.Column
	}
	return append(list, e)
}

// valueDepth returns how deep the arrays and inline tables of a value
// nest, counting no further than limit.
func valueDepth(v *unstable.Node, limit int) int {
	if v == nil || limit <= 0 || v.Kind != unstable.Array && v.Kind != unstable.InlineTable {
		return 0
	}
	deepest := 0
	for it := v.Children(); it.Next(); {
		c := it.Node()
		if c.Kind == unstable.KeyValue {
			deepest = max(deepest, keyDepth(c)-1+valueDepth(c.Value(), limit-keyDepth(c)))
			continue
		}
		deepest = max(deepest, valueDepth(c, limit-1))
	}
	return 1 + deepest
}

// shorten cuts s to at most n bytes, at a character boundary, marking the
// cut.
func shorten(s string, n int) string {
	if len(s) <= n {
		return s
	}
	cut := n
	for cut > 0 && !utf8.RuneStart(s[cut]) {
		cut--
	}
	return s[:cut] + fmt.Sprintf("… (%d bytes more)", len(s)-cut)
}

// joinShort joins lines until they would pass maxErrorsLen bytes, then
// says how many are left out.
func joinShort(file string, lines []string) string {
	var b strings.Builder
	for i, l := range lines {
		if i > 0 && b.Len()+len(l) > maxErrorsLen {
			fmt.Fprintf(&b, "\n%s: and %d more", file, len(lines)-i)
			break
		}
		if i > 0 {
			b.WriteByte('\n')
		}
		b.WriteString(l)
	}
	return b.String()
}
