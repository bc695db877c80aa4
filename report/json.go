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

	"github.com/armtally/armtally/experiment"
)

// SchemaID is the $id of the JSON Schema that describes a Document. It
// names the schema; nothing is served at that address.
const SchemaID = "https://armtally.invalid/schema/readout/2.1.0"

// SchemaVersion is the semantic version of the JSON document layout (the
// field names of jsonwire.go). A
// consumer may rely on every key of a given major version; a minor version
// only adds keys.
const SchemaVersion = "2.1.0"

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
