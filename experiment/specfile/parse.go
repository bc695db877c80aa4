package specfile

import (
	"bytes"
	"errors"
	"fmt"
	"slices"
	"strings"

	toml "github.com/pelletier/go-toml/v2"
	"github.com/pelletier/go-toml/v2/unstable"
)

// The TOML layout of an experiment spec file. Every key is documented in
// Help and in testdata/example.toml; specKeys lists them with the type
// each wants. Scalars whose absence matters are pointers.

type fileSpec struct {
	Input      fileInput        `toml:"input"`
	Columns    fileColumns      `toml:"columns"`
	Output     fileOutput       `toml:"output"`
	Experiment []fileExperiment `toml:"experiment"`
}

type fileInput struct {
	Paths            []string `toml:"paths"`
	Shape            *string  `toml:"shape"`
	Delimiter        *string  `toml:"delimiter"`
	MaxBadRows       *int64   `toml:"max_bad_rows"`
	MaxBadShare      *float64 `toml:"max_bad_share"`
	PartitionColumns []string `toml:"partition_columns"`
}

type fileColumns struct {
	User        *string  `toml:"user"`
	TS          *string  `toml:"ts"`
	Event       *string  `toml:"event"`
	Experiment  *string  `toml:"experiment"`
	Arm         *string  `toml:"arm"`
	EpochUnit   *string  `toml:"epoch_unit"`
	Segments    []string `toml:"segments"`
	Metric      *string  `toml:"metric"`
	Units       *string  `toml:"units"`
	Conversions *string  `toml:"conversions"`
	Immature    *string  `toml:"immature"`
}

type fileOutput struct {
	Markdown          *string `toml:"markdown"`
	JSON              *string `toml:"json"`
	Audit             *string `toml:"audit"`
	FailOnSampleRatio *bool   `toml:"fail_on_sample_ratio"`
	History           *string `toml:"history"`
	LooksChart        *string `toml:"looks_chart"`
	MaxStaleness      *string `toml:"max_staleness"`
	ExitOnBoundary    *bool   `toml:"exit_on_boundary"`
}

type fileExperiment struct {
	Key                  *string      `toml:"key"`
	ExposureEvent        *string      `toml:"exposure_event"`
	Control              *string      `toml:"control"`
	Arms                 []string     `toml:"arms"`
	Split                []float64    `toml:"split"`
	Start                any          `toml:"start"`
	End                  any          `toml:"end"`
	MultiArm             *string      `toml:"multi_arm"`
	Maturity             *string      `toml:"maturity"`
	Alpha                *float64     `toml:"alpha"`
	Alternative          *string      `toml:"alternative"`
	Adjust               *string      `toml:"adjust"`
	Interval             *string      `toml:"interval"`
	DifferenceInterval   *string      `toml:"difference_interval"`
	NonInferiorityMethod *string      `toml:"non_inferiority_method"`
	MinCount             *int64       `toml:"min_count"`
	SampleRatioThreshold *float64     `toml:"sample_ratio_threshold"`
	Segments             []string     `toml:"segments"`
	AllowAbsentEvents    []string     `toml:"allow_absent_events"`
	PlannedUnits         *int64       `toml:"planned_units"`
	MixingVariance       *float64     `toml:"mixing_variance"`
	Metric               []fileMetric `toml:"metric"`
}

type fileMetric struct {
	Name   *string  `toml:"name"`
	Events []string `toml:"events"`
	Window *string  `toml:"window"`
	Role   *string  `toml:"role"`
	Better *string  `toml:"better"`
	Margin *string  `toml:"margin"`
	Target any      `toml:"target"`
	Column *string  `toml:"column"`
	// Sequential is the metric's sequential method.
	Sequential *string `toml:"sequential"`
}

// decodeSpec decodes data strictly into fsp and locates its keys.
func decodeSpec(name string, data []byte, fsp *fileSpec) (l *locator, err error) {
	defer func() {
		// Last-resort guard: the TOML library must not crash the command.
		if v := recover(); v != nil {
			l, err = nil, &Error{File: name, Msg: fmt.Sprintf("cannot parse the file (TOML parser failed: %v)", v)}
		}
	}()
	dec := toml.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if derr := dec.Decode(fsp); derr != nil {
		return nil, decodeError(name, data, derr)
	}
	return locate(name, data), nil
}

// maxLocated is the number of unknown keys whose line and indexed path
// are looked up; the message lists only the first few.
const maxLocated = 20

// decodeError turns go-toml's errors into spec errors with the file, line,
// column and key, and a message in the file's terms.
func decodeError(name string, data []byte, err error) error {
	var sme *toml.StrictMissingError
	if errors.As(err, &sme) {
		l := locate(name, data)
		var out Errors
		for i := range sme.Errors {
			de := &sme.Errors[i]
			plain := strings.Join(de.Key(), ".")
			line, col, key := 0, 0, plain
			if i < maxLocated {
				// Each position is found by counting lines from the
				// start of the file: only the listed ones are.
				line, col = de.Position()
				key = l.keyAt(line, plain)
			}
			msg := "unknown key"
			if known := knownKeys(parentKey(plain)); known != "" {
				msg += " (known keys here: " + known + ")"
			}
			out = append(out, &Error{File: name, Line: line, Col: col, Key: key, Msg: msg})
		}
		if len(out) == 1 {
			return out[0]
		}
		return out
	}
	var de *toml.DecodeError
	if errors.As(err, &de) {
		line, col := de.Position()
		msg := strings.TrimPrefix(de.Error(), "toml: ")
		plain := strings.Join(de.Key(), ".")
		key := plain
		if want, ok := specKeys[plain]; ok && strings.Contains(msg, "cannot decode") {
			// A wrong type: say what the key wants in the file's terms.
			got := ""
			if _, rest, ok := strings.Cut(msg, "cannot decode TOML "); ok {
				got, _, _ = strings.Cut(rest, " ")
			}
			// An element of a list has the wrong type when the list is.
			if got != "array" && strings.HasPrefix(want, "a list of ") {
				want = "a list whose elements are all " + strings.TrimSuffix(strings.TrimPrefix(want, "a list of "), "s") + "s"
			}
			msg = "wrong type: want " + want
			if got != "" {
				msg += " (the file has a TOML " + got + ")"
			}
			key = locateKey(name, data, line, plain)
		}
		return &Error{File: name, Line: line, Col: col, Key: key, Msg: msg}
	}
	return &Error{File: name, Msg: err.Error()}
}

// locateKey finds the indexed path of the key plain written at line, when
// the document parses.
func locateKey(name string, data []byte, line int, plain string) (key string) {
	defer func() {
		if recover() != nil {
			key = plain
		}
	}()
	return locate(name, data).keyAt(line, plain)
}

// locate walks a TOML document that go-toml has already decoded and records
// the line of every table header, key and array element.
func locate(file string, data []byte) *locator {
	l := &locator{file: file, lines: map[string]int{}}
	var p unstable.Parser
	p.Reset(data)
	// The parser's Shape counts the lines from the start of the document
	// on every call, which made locating the keys of a file with
	// thousands of experiments take minutes; a table of line starts
	// answers each in a binary search.
	var starts []int
	for i, b := range data {
		if b == '\n' {
			starts = append(starts, i+1)
		}
	}
	lineOf := func(n *unstable.Node) int {
		if n == nil || n.Raw.Length == 0 && n.Raw.Offset == 0 {
			return 0
		}
		// The number of line starts at or before the offset, plus the
		// first line.
		line, _ := slices.BinarySearch(starts, int(n.Raw.Offset)+1)
		return line + 1
	}
	set := func(path string, line int) {
		if _, ok := l.lines[path]; !ok && line > 0 {
			l.lines[path] = line
		}
	}
	// count holds the number of elements so far of each array of tables.
	count := map[string]int{}
	var walk func(path string, v *unstable.Node, line int)
	walk = func(path string, v *unstable.Node, line int) {
		switch v.Kind {
		case unstable.InlineTable:
			for it := v.Children(); it.Next(); {
				c := it.Node()
				if c.Kind != unstable.KeyValue {
					continue
				}
				parts, first := keyParts(c)
				kp := joinKey(path, parts...)
				set(kp, lineOf(first))
				walk(kp, c.Value(), lineOf(first))
			}
		case unstable.Array:
			j := 0
			for it := v.Children(); it.Next(); {
				c := it.Node()
				if c.Kind == unstable.Comment {
					continue
				}
				ep := fmt.Sprintf("%s[%d]", path, j)
				el := lineOf(c)
				if el == 0 {
					el = line
				}
				set(ep, el)
				walk(ep, c, el)
				j++
			}
		}
	}
	table := ""
	for p.NextExpression() {
		e := p.Expression()
		switch e.Kind {
		case unstable.Table, unstable.ArrayTable:
			parts, first := keyParts(e)
			path := ""
			for i, part := range parts {
				path = joinKey(path, part)
				if i == len(parts)-1 && e.Kind == unstable.ArrayTable {
					n := count[path]
					count[path] = n + 1
					path = fmt.Sprintf("%s[%d]", path, n)
				} else if n, ok := count[path]; ok {
					path = fmt.Sprintf("%s[%d]", path, n-1)
				}
			}
			table = path
			set(path, lineOf(first))
		case unstable.KeyValue:
			parts, first := keyParts(e)
			path := joinKey(table, parts...)
			set(path, lineOf(first))
			walk(path, e.Value(), lineOf(first))
		}
	}
	return l
}

// keyParts returns the parts of a key-value's or table header's key and
// the node of its first part.
func keyParts(n *unstable.Node) ([]string, *unstable.Node) {
	var parts []string
	var first *unstable.Node
	for it := n.Key(); it.Next(); {
		k := it.Node()
		if first == nil {
			first = k
		}
		parts = append(parts, string(k.Data))
	}
	return parts, first
}

func joinKey(prefix string, parts ...string) string {
	for _, p := range parts {
		if prefix == "" {
			prefix = p
		} else {
			prefix += "." + p
		}
	}
	return prefix
}
