package report

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"reflect"
	"strconv"
	"strings"
	"time"

	"github.com/armtally/armtally/experiment"
)

// SchemaID is the $id of the JSON Schema that describes a Document. It
// names the schema; nothing is served at that address.
const SchemaID = "https://armtally.invalid/schema/readout/1.2.0"

// SchemaVersion is the semantic version of the JSON document layout. A
// consumer may rely on every key of a given major version; a minor version
// only adds keys.
const SchemaVersion = "1.2.0"

// Document is the top level of the JSON output: the schema it follows and
// the readouts, in the order given to WriteJSON. The layout of each readout
// is that of experiment.Readout's JSON field names; Schema returns the
// exact description.
type Document struct {
	// Schema is SchemaID.
	Schema string `json:"schema"`
	// SchemaVersion is SchemaVersion.
	SchemaVersion string `json:"schema_version"`
	// Readouts holds one analysed experiment each.
	Readouts []experiment.Readout `json:"readouts"`
}

// NewDocument wraps readouts in a Document ready to encode. The readouts
// are copied, not modified: every nil slice becomes an empty one (so that
// the JSON holds [] rather than null) and every time becomes UTC (so that
// the same instants give the same bytes).
func NewDocument(readouts []experiment.Readout) Document {
	doc := Document{
		Schema:        SchemaID,
		SchemaVersion: SchemaVersion,
		Readouts:      make([]experiment.Readout, len(readouts)),
	}
	for i, r := range readouts {
		doc.Readouts[i] = normalize(r)
	}
	return doc
}

// WriteJSON writes readouts to w as one indented JSON Document followed by a
// newline. Keys come in struct declaration order and floats at full
// precision, so the same readouts always give the same bytes.
//
// A NaN or infinite value anywhere in the readouts is an error naming its
// JSON path; nothing is written then. WriteJSON does not otherwise check
// the readouts (that shares sum to one, say).
func WriteJSON(w io.Writer, readouts []experiment.Readout) error {
	doc := NewDocument(readouts)
	if err := checkFinite(doc); err != nil {
		return err
	}
	var buf bytes.Buffer
	enc := json.NewEncoder(&buf)
	enc.SetIndent("", "  ")
	enc.SetEscapeHTML(false)
	if err := enc.Encode(doc); err != nil {
		return fmt.Errorf("encode json readout: %w", err)
	}
	_, err := w.Write(buf.Bytes())
	return err
}

// normalize returns a copy of r with empty slices for nil ones and times in
// UTC. Pointers to numbers are shared with r; pointers to structs that hold
// slices are copied.
func normalize(r experiment.Readout) experiment.Readout {
	r.WindowStart = utc(r.WindowStart)
	r.WindowEnd = utc(r.WindowEnd)
	r.Freshness = utc(r.Freshness)
	r.Arms = cloneSlice(r.Arms)
	r.Warnings = cloneSlice(r.Warnings)
	r.Segmentation.Dimensions = cloneSlice(r.Segmentation.Dimensions)
	r.Metrics = cloneSlice(r.Metrics)
	for i := range r.Metrics {
		m := &r.Metrics[i]
		m.Events = cloneSlice(m.Events)
		m.Warnings = cloneSlice(m.Warnings)
		m.Arms = normalizeArms(m.Arms)
		m.Comparisons = normalizeComparisons(m.Comparisons)
		m.Segments = cloneSlice(m.Segments)
		for j := range m.Segments {
			s := &m.Segments[j]
			s.Arms = normalizeArms(s.Arms)
			s.Comparisons = normalizeComparisons(s.Comparisons)
		}
	}
	d := &r.Diagnostics
	d.BadRows = cloneSlice(d.BadRows)
	d.UnitsPerArm = cloneSlice(d.UnitsPerArm)
	d.Immature = cloneSlice(d.Immature)
	d.IgnoredEvents = cloneSlice(d.IgnoredEvents)
	return r
}

// normalizeArms copies arms, and the target tests that hold slices.
func normalizeArms(arms []experiment.ArmRate) []experiment.ArmRate {
	arms = cloneSlice(arms)
	for j := range arms {
		if tt := arms[j].TargetTest; tt != nil {
			c := *tt
			c.Warnings = cloneSlice(c.Warnings)
			arms[j].TargetTest = &c
		}
	}
	return arms
}

// normalizeComparisons copies comparisons, and the non-inferiority tests
// that hold slices.
func normalizeComparisons(cs []experiment.Comparison) []experiment.Comparison {
	cs = cloneSlice(cs)
	for j := range cs {
		c := &cs[j]
		c.Warnings = cloneSlice(c.Warnings)
		if ni := c.NonInferiority; ni != nil {
			n := *ni
			n.Warnings = cloneSlice(n.Warnings)
			c.NonInferiority = &n
		}
	}
	return cs
}

// cloneSlice returns a copy of s that is never nil.
func cloneSlice[T any](s []T) []T {
	return append(make([]T, 0, len(s)), s...)
}

func utc(t *time.Time) *time.Time {
	if t == nil {
		return nil
	}
	u := t.UTC()
	return &u
}

// checkFinite walks v and returns an error naming the JSON path of the
// first NaN or infinite float it meets, in field order.
func checkFinite(v any) error {
	return walkFinite(reflect.ValueOf(v), "$")
}

func walkFinite(v reflect.Value, path string) error {
	switch v.Kind() {
	case reflect.Float32, reflect.Float64:
		if f := v.Float(); math.IsNaN(f) || math.IsInf(f, 0) {
			return fmt.Errorf("readout value %s is %v: JSON has no NaN or infinity (the analysis should give null for an undefined value)", path, f)
		}
	case reflect.Pointer, reflect.Interface:
		if !v.IsNil() {
			return walkFinite(v.Elem(), path)
		}
	case reflect.Slice, reflect.Array:
		for i := range v.Len() {
			if err := walkFinite(v.Index(i), path+"["+strconv.Itoa(i)+"]"); err != nil {
				return err
			}
		}
	case reflect.Struct:
		t := v.Type()
		for i := range t.NumField() {
			f := t.Field(i)
			if !f.IsExported() {
				continue
			}
			name, _, _ := strings.Cut(f.Tag.Get("json"), ",")
			if name == "-" {
				continue
			}
			if name == "" {
				name = f.Name
			}
			if err := walkFinite(v.Field(i), path+"."+name); err != nil {
				return err
			}
		}
	}
	return nil
}
