package main

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"

	toml "github.com/pelletier/go-toml/v2"
	"github.com/pelletier/go-toml/v2/unstable"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/ingest"
)

// The TOML layout of an experiment spec file. Every key is documented in
// specHelp and in testdata/spec/example.toml; specKeys lists them with the
// type each wants. Scalars whose absence matters are pointers.

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
}

// specKeys lists every key of a spec file (array indices left out) with
// the kind of value it wants, for error messages and for the test that
// checks that each is documented.
var specKeys = map[string]string{
	"input":                             "a table",
	"input.paths":                       "a list of strings",
	"input.shape":                       "a string",
	"input.delimiter":                   "a string",
	"input.max_bad_rows":                "an integer",
	"input.max_bad_share":               "a number",
	"input.partition_columns":           "a list of strings",
	"columns":                           "a table",
	"columns.user":                      "a string",
	"columns.ts":                        "a string",
	"columns.event":                     "a string",
	"columns.experiment":                "a string",
	"columns.arm":                       "a string",
	"columns.epoch_unit":                "a string",
	"columns.segments":                  "a list of strings",
	"columns.metric":                    "a string",
	"columns.units":                     "a string",
	"columns.conversions":               "a string",
	"columns.immature":                  "a string",
	"output":                            "a table",
	"output.markdown":                   "a string",
	"output.json":                       "a string",
	"output.audit":                      "a string",
	"output.fail_on_sample_ratio":       "true or false",
	"experiment":                        "an array of tables ([[experiment]])",
	"experiment.key":                    "a string",
	"experiment.exposure_event":         "a string",
	"experiment.control":                "a string",
	"experiment.arms":                   "a list of strings",
	"experiment.split":                  "a list of numbers",
	"experiment.start":                  "a date, a date-time or a string",
	"experiment.end":                    "a date, a date-time or a string",
	"experiment.multi_arm":              "a string",
	"experiment.maturity":               "a string",
	"experiment.alpha":                  "a number",
	"experiment.alternative":            "a string",
	"experiment.adjust":                 "a string",
	"experiment.interval":               "a string",
	"experiment.difference_interval":    "a string",
	"experiment.non_inferiority_method": "a string",
	"experiment.min_count":              "an integer",
	"experiment.sample_ratio_threshold": "a number",
	"experiment.segments":               "a list of strings",
	"experiment.metric":                 "an array of tables ([[experiment.metric]])",
	"experiment.metric.name":            "a string",
	"experiment.metric.events":          "a list of strings",
	"experiment.metric.window":          "a string",
	"experiment.metric.role":            "a string",
	"experiment.metric.better":          "a string",
	"experiment.metric.margin":          "a string",
	"experiment.metric.target":          "a number or a string",
	"experiment.metric.column":          "a string",
}

// documentedKeys returns the keys of a spec file, sorted: the entries of
// specKeys that name a key (not an element or a value form).
func documentedKeys() []string {
	var out []string
	for k := range specKeys {
		if !strings.ContainsAny(k, "[(") {
			out = append(out, k)
		}
	}
	sort.Strings(out)
	return out
}

// Input shapes (input.shape).
const (
	shapeEvents = "events"
	shapeUnits  = "units"
	shapeCounts = "counts"
)

// Metric roles (experiment.metric.role).
const (
	rolePrimary   = "primary"
	roleSecondary = "secondary"
	roleGuardrail = "guardrail"
)

// specError is a problem with a spec file: the file, the line (0 when
// unknown), the column (0 when unknown), the key and what is wrong.
type specError struct {
	File      string
	Line, Col int
	Key       string
	Msg       string
}

func (e *specError) Error() string {
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
		b.WriteString(e.Key)
		b.WriteString(": ")
	}
	b.WriteString(e.Msg)
	return b.String()
}

// specErrors is several spec errors at once (every unknown key, say).
type specErrors []*specError

func (es specErrors) Error() string {
	lines := make([]string, len(es))
	for i, e := range es {
		lines[i] = e.Error()
	}
	return strings.Join(lines, "\n")
}

// origin says where a setting came from: a command-line flag, a key of a
// spec file, or neither (a default).
type origin struct {
	flag string // "--split"
	file string // spec file name
	line int
	key  string // "experiment[0].split"
}

// String names the origin as an error message starts: "--split" or
// "spec.toml:9: experiment[0].split".
func (o origin) String() string {
	switch {
	case o.flag != "":
		return o.flag
	case o.file != "":
		if o.line > 0 {
			return fmt.Sprintf("%s:%d: %s", o.file, o.line, o.key)
		}
		return fmt.Sprintf("%s: %s", o.file, o.key)
	}
	return "the default"
}

// errorf returns an error about the setting from o: a usage error that
// starts with "analyze: --flag" for a flag, a *specError for a file key.
func (o origin) errorf(format string, args ...any) error {
	msg := fmt.Sprintf(format, args...)
	if o.file != "" && o.flag == "" {
		return &specError{File: o.file, Line: o.line, Key: o.key, Msg: msg}
	}
	name := o.flag
	if name == "" {
		name = "the default"
	}
	return usagef("analyze: %s: %s", name, msg)
}

// locator knows the line of every key of a parsed spec file, with array
// indices written out: "experiment[1].metric[0].margin".
type locator struct {
	file  string
	lines map[string]int
}

// at returns the origin of the key path.
func (l *locator) at(path string) origin {
	return origin{file: l.file, line: l.line(path), key: path}
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

// checkKeys reports keys that are not exactly a documented key. The TOML
// decoder matches keys to fields regardless of case; a spec file's keys
// are lower case, as TOML keys are case-sensitive.
func (l *locator) checkKeys() error {
	var bad specErrors
	for path, line := range l.lines {
		plain := stripIndices(path)
		if _, ok := specKeys[plain]; ok || l.underValue(plain) {
			continue
		}
		msg := "unknown key"
		for _, k := range documentedKeys() {
			if strings.EqualFold(k, plain) {
				msg += fmt.Sprintf(" (keys are lower case: %s)", k[strings.LastIndexByte(k, '.')+1:])
				break
			}
		}
		bad = append(bad, &specError{File: l.file, Line: line, Key: path, Msg: msg})
	}
	if len(bad) == 0 {
		return nil
	}
	sort.Slice(bad, func(i, j int) bool {
		if bad[i].Line != bad[j].Line {
			return bad[i].Line < bad[j].Line
		}
		return bad[i].Key < bad[j].Key
	})
	// Report the outermost unknown key of each line once.
	var out specErrors
	for _, e := range bad {
		if n := len(out); n > 0 && (out[n-1].Line == e.Line || strings.HasPrefix(e.Key, out[n-1].Key+".") || strings.HasPrefix(e.Key, out[n-1].Key+"[")) {
			continue
		}
		out = append(out, e)
	}
	if len(out) == 1 {
		return out[0]
	}
	return out
}

// underValue reports whether plain lies inside the value of a documented
// key that is not a table (start = {...}, say): its type check reports it.
func (l *locator) underValue(plain string) bool {
	for p := parentKey(plain); p != ""; p = parentKey(p) {
		if want, ok := specKeys[p]; ok {
			return !strings.HasPrefix(want, "a table") && !strings.HasPrefix(want, "an array of tables")
		}
	}
	return false
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

// locate walks a TOML document that go-toml has already decoded and records
// the line of every table header, key and array element.
func locate(file string, data []byte) *locator {
	l := &locator{file: file, lines: map[string]int{}}
	var p unstable.Parser
	p.Reset(data)
	lineOf := func(n *unstable.Node) int {
		if n == nil || n.Raw.Length == 0 && n.Raw.Offset == 0 {
			return 0
		}
		return p.Shape(n.Raw).Start.Line
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

// specFile is a parsed and checked spec file: where to read, how to map
// the columns, where to write, and the experiments.
type specFile struct {
	name string // as given on the command line
	dir  string // the folder relative paths start from

	paths      []string // input.paths, resolved against dir
	pathsFrom  origin
	shape      string
	shapeFrom  origin
	delimiter  rune // 0 when not set (",")
	delimFrom  origin
	maxBadRows int64
	badRowFrom origin
	maxBad     float64
	badFrom    origin
	partitions []string
	partFrom   origin

	mapping     ingest.Mapping
	mappingFrom map[string]origin // logical name (user, ts, ..., segments) -> origin
	// counts holds the counts table's column names (columns.metric,
	// units, conversions and immature; the defaults are metric, units,
	// conversions and none).
	counts ingest.CountsOptions

	markdown, json, audit string // resolved against dir; "" when not set
	auditFrom             origin
	failOnSampleRatio     *bool

	experiments []*expSettings
}

// readSpecFile reads and parses the spec file at path.
func readSpecFile(path string) (*specFile, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, usagef("analyze: --spec: %v", err)
	}
	return parseSpecFile(path, data)
}

// parseSpecFile parses a spec file named name (relative paths inside it
// start from name's folder). Unknown keys, values of the wrong type and
// values that contradict each other are errors naming the file, the line
// and the key. Keys whose feature is not available yet are accepted here
// and refused by unsupported.
func parseSpecFile(name string, data []byte) (*specFile, error) {
	var fsp fileSpec
	l, err := decodeSpec(name, data, &fsp)
	if err != nil {
		return nil, err
	}
	if err := l.checkKeys(); err != nil {
		return nil, err
	}
	if _, ok := l.lines["experiment[0]"]; len(fsp.Experiment) > 0 && !ok {
		// The decoder takes a lone table for a one-element list; in TOML,
		// [[experiment.metric]] before any [[experiment]] makes experiment
		// a plain table.
		line := 0
		for p, n := range l.lines {
			if strings.HasPrefix(p, "experiment") && (line == 0 || n < line) {
				line = n
			}
		}
		return nil, &specError{File: name, Line: line, Key: "experiment",
			Msg: "want an array of tables: start each experiment with [[experiment]], before its [[experiment.metric]] tables"}
	}
	sf := &specFile{name: name, dir: filepath.Dir(name), mapping: ingest.DefaultMapping(),
		mappingFrom: map[string]origin{}, shape: shapeEvents}
	if err := sf.parseInput(l, fsp.Input); err != nil {
		return nil, err
	}
	if err := sf.parseColumns(l, fsp.Columns); err != nil {
		return nil, err
	}
	if err := sf.parseOutput(l, fsp.Output); err != nil {
		return nil, err
	}
	keys := map[string]string{}
	for i, fe := range fsp.Experiment {
		e, err := sf.parseExperiment(l, i, fe)
		if err != nil {
			return nil, err
		}
		if len(fsp.Experiment) > 1 && e.key == "" {
			o := l.at(fmt.Sprintf("experiment[%d].key", i))
			return nil, o.errorf("every experiment needs a key when the file has several (%d)", len(fsp.Experiment))
		}
		if prev, dup := keys[e.key]; dup {
			return nil, e.from["key"].errorf("experiment key %q is also the key of %s", e.key, prev)
		}
		keys[e.key] = e.from["key"].String()
		if i > 0 && sf.shape != shapeEvents {
			return nil, e.from["experiment"].errorf("a %s table holds one experiment; this file has %d (input.shape = %q)",
				map[string]string{shapeUnits: "unit", shapeCounts: "counts"}[sf.shape], len(fsp.Experiment), sf.shape)
		}
		// Check the experiment as it stands, so that contradictions are
		// reported against the file even before flags are applied.
		if _, _, err := e.build(); err != nil {
			return nil, err
		}
		sf.experiments = append(sf.experiments, e)
	}
	return sf, nil
}

// decodeSpec decodes data strictly into fsp and locates its keys.
func decodeSpec(name string, data []byte, fsp *fileSpec) (l *locator, err error) {
	defer func() {
		// Last-resort guard: the TOML library must not crash the command.
		if v := recover(); v != nil {
			l, err = nil, &specError{File: name, Msg: fmt.Sprintf("cannot parse the file (TOML parser failed: %v)", v)}
		}
	}()
	dec := toml.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if derr := dec.Decode(fsp); derr != nil {
		return nil, decodeError(name, data, derr)
	}
	return locate(name, data), nil
}

// decodeError turns go-toml's errors into spec errors with the file, line,
// column and key, and a message in the file's terms.
func decodeError(name string, data []byte, err error) error {
	var sme *toml.StrictMissingError
	if errors.As(err, &sme) {
		l := locate(name, data)
		var out specErrors
		for i := range sme.Errors {
			de := &sme.Errors[i]
			line, col := de.Position()
			plain := strings.Join(de.Key(), ".")
			key := l.keyAt(line, plain)
			msg := "unknown key"
			if known := knownKeys(parentKey(plain)); known != "" {
				msg += " (known keys here: " + known + ")"
			}
			out = append(out, &specError{File: name, Line: line, Col: col, Key: key, Msg: msg})
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
		return &specError{File: name, Line: line, Col: col, Key: key, Msg: msg}
	}
	return &specError{File: name, Msg: err.Error()}
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

// parentKey returns the table part of a dotted key.
func parentKey(k string) string {
	if i := strings.LastIndexByte(k, '.'); i >= 0 {
		return k[:i]
	}
	return ""
}

// knownKeys lists the keys of the table parent ("" for the top level).
func knownKeys(parent string) string {
	var out []string
	for _, k := range documentedKeys() {
		if parentKey(k) == parent {
			out = append(out, k[strings.LastIndexByte(k, '.')+1:])
		}
	}
	return strings.Join(out, ", ")
}

// resolve makes a path from the file relative to the file's folder.
func (sf *specFile) resolve(p string) string {
	if filepath.IsAbs(p) {
		return p
	}
	return filepath.Join(sf.dir, p)
}

func (sf *specFile) parseInput(l *locator, in fileInput) error {
	for i, p := range in.Paths {
		if strings.TrimSpace(p) == "" {
			return l.at(fmt.Sprintf("input.paths[%d]", i)).errorf("empty path")
		}
		sf.paths = append(sf.paths, sf.resolve(p))
	}
	sf.pathsFrom = l.at("input.paths")
	if in.Shape != nil {
		sf.shapeFrom = l.at("input.shape")
		switch *in.Shape {
		case shapeEvents, shapeUnits, shapeCounts:
			sf.shape = *in.Shape
		default:
			return sf.shapeFrom.errorf("%q: want events, units or counts", *in.Shape)
		}
	}
	if in.Delimiter != nil {
		sf.delimFrom = l.at("input.delimiter")
		d, err := parseDelimiter(*in.Delimiter)
		if err != nil {
			return sf.delimFrom.errorf("%v", err)
		}
		sf.delimiter = d
	}
	if in.MaxBadRows != nil {
		sf.badRowFrom = l.at("input.max_bad_rows")
		if *in.MaxBadRows < ingest.NoLimit {
			return sf.badRowFrom.errorf("%d: want 0 or more, or -1 for no limit", *in.MaxBadRows)
		}
		sf.maxBadRows = *in.MaxBadRows
	}
	if in.MaxBadShare != nil {
		sf.badFrom = l.at("input.max_bad_share")
		if v := *in.MaxBadShare; !(v >= 0 && v <= 1) {
			return sf.badFrom.errorf("%v: want a share from 0 to 1, such as 0.001 (1 allows any share)", v)
		}
		sf.maxBad = *in.MaxBadShare
	}
	seen := map[string]bool{}
	for i, c := range in.PartitionColumns {
		o := l.at(fmt.Sprintf("input.partition_columns[%d]", i))
		if c == "" || seen[c] {
			return o.errorf("%q: empty or repeated column name", c)
		}
		seen[c] = true
	}
	sf.partitions = in.PartitionColumns
	sf.partFrom = l.at("input.partition_columns")
	return nil
}

func (sf *specFile) parseColumns(l *locator, c fileColumns) error {
	m := &sf.mapping
	for _, col := range []struct {
		key      string
		v        *string
		dst      *string
		optional bool
	}{
		{"user", c.User, &m.User, false},
		{"ts", c.TS, &m.TS, false},
		{"event", c.Event, &m.Event, false},
		{"experiment", c.Experiment, &m.Experiment, true},
		{"arm", c.Arm, &m.Arm, true},
	} {
		if col.v == nil {
			continue
		}
		o := l.at("columns." + col.key)
		if *col.v == "" && !col.optional {
			return o.errorf("empty column name")
		}
		*col.dst = *col.v
		sf.mappingFrom[col.key] = o
	}
	if c.EpochUnit != nil {
		o := l.at("columns.epoch_unit")
		switch *c.EpochUnit {
		case "s", "ms", "us", "ns":
		default:
			return o.errorf("%q: want s, ms, us or ns", *c.EpochUnit)
		}
		m.EpochUnit = *c.EpochUnit
		sf.mappingFrom["epoch_unit"] = o
	}
	seen := map[string]bool{m.User: true, m.TS: true, m.Event: true, m.Experiment: true, m.Arm: true}
	for i, s := range c.Segments {
		o := l.at(fmt.Sprintf("columns.segments[%d]", i))
		if s == "" || seen[s] {
			return o.errorf("%q: empty, repeated or already mapped column", s)
		}
		seen[s] = true
		m.Segments = append(m.Segments, s)
	}
	if c.Segments != nil {
		sf.mappingFrom["segments"] = l.at("columns.segments")
	}
	sf.counts = ingest.CountsOptions{Metric: experiment.ColMetric, Units: experiment.ColUnits, Conversions: experiment.ColConversions}
	for _, col := range []struct {
		key string
		v   *string
		dst *string
	}{{"metric", c.Metric, &sf.counts.Metric}, {"units", c.Units, &sf.counts.Units},
		{"conversions", c.Conversions, &sf.counts.Conversions}, {"immature", c.Immature, &sf.counts.Immature}} {
		if col.v == nil {
			continue
		}
		o := l.at("columns." + col.key)
		if *col.v == "" {
			return o.errorf("empty column name")
		}
		if sf.shape != shapeCounts {
			return o.errorf("is for input.shape = \"counts\" (the shape is %q)", sf.shape)
		}
		*col.dst = *col.v
	}
	return nil
}

func (sf *specFile) parseOutput(l *locator, o fileOutput) error {
	for _, out := range []struct {
		key string
		v   *string
		dst *string
	}{{"markdown", o.Markdown, &sf.markdown}, {"json", o.JSON, &sf.json}, {"audit", o.Audit, &sf.audit}} {
		if out.v == nil {
			continue
		}
		if *out.v == "" {
			return l.at("output." + out.key).errorf("empty path")
		}
		*out.dst = sf.resolve(*out.v)
	}
	sf.auditFrom = l.at("output.audit")
	if sf.audit != "" && sf.shape == shapeCounts {
		return sf.auditFrom.errorf("an audit table lists units, and a counts table (input.shape = \"counts\") has none")
	}
	sf.failOnSampleRatio = o.FailOnSampleRatio
	return nil
}

// parseExperiment checks one [[experiment]] table key by key; build checks
// the keys against each other.
func (sf *specFile) parseExperiment(l *locator, i int, fe fileExperiment) (*expSettings, error) {
	e := newExpSettings()
	e.index = i
	e.shape = sf.shape
	p := fmt.Sprintf("experiment[%d]", i)
	at := func(key string) origin { return l.at(p + "." + key) }
	e.from["experiment"] = l.at(p)
	e.from["key"] = at("key")
	if fe.Key != nil {
		e.key = *fe.Key
	}
	for _, s := range []struct {
		key string
		v   *string
		dst *string
	}{{"exposure_event", fe.ExposureEvent, &e.exposureEvent}, {"control", fe.Control, &e.control}} {
		if s.v == nil {
			continue
		}
		if *s.v == "" {
			return nil, at(s.key).errorf("must not be empty")
		}
		*s.dst = *s.v
		e.from[s.key] = at(s.key)
	}
	if fe.Arms != nil {
		seen := map[string]bool{}
		for j, a := range fe.Arms {
			if a == "" || seen[a] {
				return nil, at(fmt.Sprintf("arms[%d]", j)).errorf("%q: empty or repeated arm name", a)
			}
			seen[a] = true
		}
		e.arms = fe.Arms
		e.from["arms"] = at("arms")
	}
	if fe.Split != nil {
		for j, v := range fe.Split {
			if !(v > 0) || v > 1e12 {
				return nil, at(fmt.Sprintf("split[%d]", j)).errorf("%v is not a positive number", v)
			}
		}
		e.split = fe.Split
		e.from["split"] = at("split")
	}
	var err error
	if e.start, err = fileTime(at("start"), fe.Start); err != nil {
		return nil, err
	}
	if e.start != nil {
		e.from["start"] = at("start")
	}
	if e.end, err = fileTime(at("end"), fe.End); err != nil {
		return nil, err
	}
	if e.end != nil {
		e.from["end"] = at("end")
	}
	if fe.MultiArm != nil {
		if e.multiArm, err = experiment.ParseMultiArmPolicy(*fe.MultiArm); err != nil {
			return nil, at("multi_arm").errorf("%q: want exclude or first", *fe.MultiArm)
		}
	}
	if fe.Maturity != nil {
		if e.maturity, err = experiment.ParseMaturityPolicy(*fe.Maturity); err != nil {
			return nil, at("maturity").errorf("%q: want exclude or include", *fe.Maturity)
		}
	}
	if fe.Alpha != nil {
		if err := e.setAlpha(*fe.Alpha, at("alpha")); err != nil {
			return nil, err
		}
	}
	if fe.Alternative != nil {
		if err := e.setAlternative(*fe.Alternative, at("alternative")); err != nil {
			return nil, err
		}
	}
	if fe.Adjust != nil {
		if err := e.setAdjust(*fe.Adjust, at("adjust")); err != nil {
			return nil, err
		}
	}
	if fe.Interval != nil {
		if err := e.setInterval(*fe.Interval, at("interval")); err != nil {
			return nil, err
		}
	}
	if fe.DifferenceInterval != nil {
		if err := e.setDifferenceInterval(*fe.DifferenceInterval, at("difference_interval")); err != nil {
			return nil, err
		}
	}
	if fe.NonInferiorityMethod != nil {
		if err := e.setNonInferiority(*fe.NonInferiorityMethod, at("non_inferiority_method")); err != nil {
			return nil, err
		}
	}
	if fe.MinCount != nil {
		if err := e.setMinCount(*fe.MinCount, at("min_count")); err != nil {
			return nil, err
		}
	}
	if fe.SampleRatioThreshold != nil {
		if err := e.setSampleRatioThreshold(*fe.SampleRatioThreshold, at("sample_ratio_threshold")); err != nil {
			return nil, err
		}
	}
	if fe.Segments != nil {
		seen := map[string]bool{}
		for j, s := range fe.Segments {
			o := at(fmt.Sprintf("segments[%d]", j))
			if s == "" || seen[s] {
				return nil, o.errorf("%q: empty or repeated segment", s)
			}
			seen[s] = true
			if !contains(sf.mapping.Segments, s) {
				return nil, o.errorf("%q is not among columns.segments (%s)", s, listOrNone(sf.mapping.Segments))
			}
		}
		e.segments = fe.Segments
		e.from["segments"] = at("segments")
	}
	names := map[string]origin{}
	for j, fm := range fe.Metric {
		ms, err := sf.parseMetric(l, fmt.Sprintf("%s.metric[%d]", p, j), fm, e.exposureEvent)
		if err != nil {
			return nil, err
		}
		if prev, dup := names[ms.metric.Name]; dup {
			return nil, ms.from.errorf("metric %q is defined twice (first at %s)", ms.metric.Name, prev)
		}
		names[ms.metric.Name] = ms.from
		e.metrics = append(e.metrics, ms)
	}
	e.from["metrics"] = at("metric")
	return e, nil
}

// parseMetric checks one [[experiment.metric]] table at path p.
func (sf *specFile) parseMetric(l *locator, p string, fm fileMetric, exposure string) (metricSetting, error) {
	at := func(key string) origin { return l.at(p + "." + key) }
	var ms metricSetting
	ms.from = at("name")
	ms.role = rolePrimary
	if fm.Name == nil || *fm.Name == "" {
		return ms, l.at(p).errorf("a metric needs a name (%s.name)", p)
	}
	m := &ms.metric
	m.Name = *fm.Name
	if sf.shape == shapeEvents && fm.Events == nil {
		return ms, l.at(p).errorf("metric %q needs its events (%s.events)", m.Name, p)
	}
	if fm.Events != nil && sf.shape != shapeEvents {
		return ms, at("events").errorf("events are for input.shape = \"events\"; a %s table holds the conversions already", sf.shape)
	}
	if fm.Events != nil && len(fm.Events) == 0 {
		return ms, at("events").errorf("metric %q: empty list of events", m.Name)
	}
	seen := map[string]bool{}
	for j, ev := range fm.Events {
		o := at(fmt.Sprintf("events[%d]", j))
		switch {
		case ev == "" || seen[ev]:
			return ms, o.errorf("%q: empty or repeated event name", ev)
		case ev == exposure:
			return ms, o.errorf("%q is the experiment's exposure event, not a conversion", ev)
		}
		seen[ev] = true
		m.Events = append(m.Events, ev)
	}
	if fm.Window != nil {
		w, err := parseWindow(*fm.Window)
		if err != nil {
			return ms, at("window").errorf("%v", err)
		}
		m.Window = w
	}
	if fm.Role != nil {
		switch *fm.Role {
		case rolePrimary, roleSecondary, roleGuardrail:
			ms.role = *fm.Role
		default:
			return ms, at("role").errorf("%q: want primary, secondary or guardrail", *fm.Role)
		}
	}
	if fm.Better != nil {
		switch *fm.Better {
		case "higher":
		case "lower":
			m.LowerIsBetter = true
		default:
			return ms, at("better").errorf("%q: want higher or lower", *fm.Better)
		}
	}
	switch {
	case fm.Margin != nil && ms.role != roleGuardrail:
		return ms, at("margin").errorf("a margin is only for guardrail metrics, and metric %q has role %q (set role = \"guardrail\" or remove the margin)", m.Name, ms.role)
	case fm.Margin == nil && ms.role == roleGuardrail:
		return ms, at("role").errorf("guardrail metric %q needs a non-inferiority margin (%s.margin, such as \"0.5pp\" or \"5%%\")", m.Name, p)
	case fm.Margin != nil:
		g, err := parseMargin(*fm.Margin)
		if err != nil {
			return ms, at("margin").errorf("%v", err)
		}
		m.Guardrail = &g
	}
	if fm.Target != nil {
		var v float64
		var err error
		switch t := fm.Target.(type) {
		case float64:
			v = t
			if !(v > 0 && v < 1) {
				err = fmt.Errorf("%v is not strictly between 0 and 1", v)
			}
		case int64:
			err = fmt.Errorf("%d is not strictly between 0 and 1 (write a share such as 0.12 or a string such as \"12%%\")", t)
		case string:
			v, err = parseRate(t)
		default:
			err = fmt.Errorf("wrong type: want a number or a string (the file has %s)", tomlKind(t))
		}
		if err != nil {
			return ms, at("target").errorf("%v", err)
		}
		m.Target = &v
	}
	if fm.Column != nil {
		if sf.shape != shapeUnits {
			return ms, at("column").errorf("is for input.shape = \"units\" (the shape is %q)", sf.shape)
		}
		if *fm.Column == "" {
			return ms, at("column").errorf("empty column name")
		}
		ms.column = *fm.Column
		ms.columnFrom = at("column")
	}
	return ms, nil
}

// fileTime reads a window bound: a TOML date (midnight UTC), a date-time
// (UTC unless it has an offset) or a string in a form ParseTimestamp reads.
func fileTime(o origin, v any) (*time.Time, error) {
	var t time.Time
	switch x := v.(type) {
	case nil:
		return nil, nil
	case toml.LocalDate:
		t = x.AsTime(time.UTC)
	case toml.LocalDateTime:
		t = x.AsTime(time.UTC)
	case time.Time:
		t = x.UTC()
	case string:
		ns, err := ingest.ParseTimestamp([]byte(x))
		if err != nil {
			return nil, o.errorf("%q: want RFC 3339 or YYYY-MM-DD[ HH:MM:SS] (UTC unless an offset is given), or a TOML date such as 2026-11-02", x)
		}
		t = time.Unix(0, ns).UTC()
	default:
		return nil, o.errorf("wrong type: want a date, a date-time or a string (the file has %s)", tomlKind(v))
	}
	if t.Year() < 1678 || t.Year() > 2261 {
		return nil, o.errorf("%s is outside the years 1678 to 2261", t.Format(time.RFC3339))
	}
	return &t, nil
}

// tomlKind names the TOML kind of a decoded value.
func tomlKind(v any) string {
	switch v.(type) {
	case bool:
		return "a boolean"
	case int64:
		return "an integer"
	case float64:
		return "a float"
	case string:
		return "a string"
	case toml.LocalTime:
		return "a local time"
	case toml.LocalDate, toml.LocalDateTime, time.Time:
		return "a date"
	case []any:
		return "an array"
	case map[string]any:
		return "a table"
	}
	return fmt.Sprintf("a %T", v)
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}

func listOrNone(list []string) string {
	if len(list) == 0 {
		return "none"
	}
	return strings.Join(list, ", ")
}

// unsupported returns an error for the first key that asks for a feature
// armtally does not have yet: "not supported yet: KEY".
func (sf *specFile) unsupported() error {
	nope := func(o origin, what string) error {
		msg := "not supported yet: " + o.key
		if what != "" {
			msg += " (" + what + ")"
		}
		return &specError{File: o.file, Line: o.line, Msg: msg}
	}
	if sf.shape != shapeEvents {
		table := fmt.Sprintf("with input.shape = %q", sf.shape)
		switch {
		case sf.delimiter != 0 && sf.delimiter != ',':
			return nope(sf.delimFrom, table+" CSV files are read with \",\" so far")
		case sf.maxBadRows != 0:
			return nope(sf.badRowFrom, table+" the first bad row stops the run so far")
		case sf.maxBad != 0:
			return nope(sf.badFrom, table+" the first bad row stops the run so far")
		}
	}
	return nil
}

// checkPartitions checks that every source has the partition keys
// input.partition_columns lists.
func (sf *specFile) checkPartitions(sources []ingest.Source) error {
	for _, key := range sf.partitions {
		for _, src := range sources {
			found := false
			for _, p := range src.Partitions {
				found = found || p.Key == key
			}
			if !found {
				var have []string
				for _, p := range src.Partitions {
					have = append(have, p.Key)
				}
				return &dataError{fmt.Errorf("%s: no partition folder %s=... on its path (input.partition_columns at %s:%d; its partitions: %s)",
					src.Name, key, sf.partFrom.file, sf.partFrom.line, listOrNone(have))}
			}
		}
	}
	return nil
}

// parseDelimiter reads a CSV delimiter: one character other than a quote or
// a line break; `\t` (backslash, t) and "tab" mean a tab.
func parseDelimiter(s string) (rune, error) {
	switch s {
	case `\t`, "tab":
		return '\t', nil
	}
	if r := []rune(s); len(r) == 1 && r[0] != '"' && r[0] != '\r' && r[0] != '\n' && r[0] != 0xFFFD {
		return r[0], nil
	}
	return 0, fmt.Errorf("%q: want one character other than a quote or a line break, such as \",\", \";\" or \"\\t\"", s)
}
