package specfile

import (
	"fmt"
	"sort"
	"strings"
)

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
	"output.history":                    "a string",
	"output.looks_chart":                "a string",
	"output.max_staleness":              "a string",
	"output.exit_on_boundary":           "true or false",
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
	"experiment.allow_absent_events":    "a list of strings",
	"experiment.planned_units":          "an integer",
	"experiment.mixing_variance":        "a number",
	"experiment.metric":                 "an array of tables ([[experiment.metric]])",
	"experiment.metric.name":            "a string",
	"experiment.metric.events":          "a list of strings",
	"experiment.metric.window":          "a string",
	"experiment.metric.role":            "a string",
	"experiment.metric.better":          "a string",
	"experiment.metric.margin":          "a string",
	"experiment.metric.target":          "a number or a string",
	"experiment.metric.column":          "a string",
	"experiment.metric.sequential":      "a string",
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

// checkKeys reports keys that are not exactly a documented key. The TOML
// decoder matches keys to fields regardless of case; a spec file's keys
// are lower case, as TOML keys are case-sensitive.
func (l *locator) checkKeys() error {
	var bad Errors
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
		bad = append(bad, &Error{File: l.file, Line: line, Key: path, Msg: msg})
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
	var out Errors
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
