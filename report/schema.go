package report

import _ "embed" // for the JSON Schema

// schemaJSON is the JSON Schema of Document; a string, so nobody can change
// it.
//
//go:embed schema/readout.schema.json
var schemaJSON string

// Schema returns the JSON Schema (draft 2020-12) that describes the output
// of WriteJSON: its $id is SchemaID and it pins schema_version to
// SchemaVersion. Each call returns a fresh copy the caller may modify.
func Schema() []byte {
	return []byte(schemaJSON)
}
