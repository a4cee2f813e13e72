package experiment

import (
	_ "embed"
	"slices"
)

// resultsSchema is results.schema.json, the JSON Schema (draft 2020-12)
// of results.json.
//
//go:embed results.schema.json
var resultsSchema []byte

// ResultsSchema returns the JSON Schema (draft 2020-12) of results.json
// (Report.WriteJSON), the file results.schema.json of this package: every
// field with its type and a description. A test checks a real run's
// results.json against it, so a field the schema does not describe fails
// the tests.
func ResultsSchema() []byte { return slices.Clone(resultsSchema) }
