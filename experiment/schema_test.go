package experiment_test

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"
	"testing"

	"github.com/successor-go/successor/experiment"
)

// schema is the part of JSON Schema (draft 2020-12, json-schema.org) that
// results.schema.json uses.
type schema struct {
	Type                 any                `json:"type"`
	Description          string             `json:"description"`
	Properties           map[string]*schema `json:"properties"`
	Required             []string           `json:"required"`
	AdditionalProperties *bool              `json:"additionalProperties"`
	Items                *schema            `json:"items"`
	Minimum              *float64           `json:"minimum"`

	Schema string `json:"$schema"`
	Title  string `json:"title"`
}

func (s *schema) types() []string {
	switch t := s.Type.(type) {
	case string:
		return []string{t}
	case []any:
		var out []string
		for _, x := range t {
			out = append(out, x.(string))
		}
		return out
	}
	return nil
}

// lint reports schema nodes that would let an undocumented field through:
// no type, no description, an object without additionalProperties false,
// a required key that is not a property, an array without items.
func (s *schema) lint(path string, errs *[]string) {
	add := func(format string, args ...any) { *errs = append(*errs, path+": "+fmt.Sprintf(format, args...)) }
	if len(s.types()) == 0 {
		add("no type")
	}
	if s.Description == "" && !strings.HasSuffix(path, "[]") {
		add("no description")
	}
	if slices.Contains(s.types(), "object") {
		if s.AdditionalProperties == nil || *s.AdditionalProperties {
			add("object without additionalProperties: false")
		}
		for _, r := range s.Required {
			if s.Properties[r] == nil {
				add("required %q is not a property", r)
			}
		}
		for k, p := range s.Properties {
			p.lint(path+"."+k, errs)
		}
	}
	if slices.Contains(s.types(), "array") {
		if s.Items == nil {
			add("array without items")
		} else {
			s.Items.lint(path+"[]", errs)
		}
	}
}

// validate checks v (decoded with UseNumber) against s.
func (s *schema) validate(path string, v any, errs *[]string) {
	add := func(format string, args ...any) { *errs = append(*errs, path+": "+fmt.Sprintf(format, args...)) }
	var got string
	switch x := v.(type) {
	case nil:
		got = "null"
	case bool:
		got = "boolean"
	case string:
		got = "string"
	case json.Number:
		got = "number"
		f, err := x.Float64()
		if err != nil {
			add("bad number %s", x)
			return
		}
		if f == math.Trunc(f) && !strings.ContainsAny(x.String(), ".eE") {
			got = "integer"
		}
		if s.Minimum != nil && f < *s.Minimum {
			add("%s below the minimum %v", x, *s.Minimum)
		}
	case []any:
		got = "array"
	case map[string]any:
		got = "object"
	}
	ts := s.types()
	if !slices.Contains(ts, got) && !(got == "integer" && slices.Contains(ts, "number")) {
		add("a JSON %s, the schema says %v", got, ts)
		return
	}
	switch x := v.(type) {
	case []any:
		for _, e := range x {
			s.Items.validate(path+"[]", e, errs)
		}
	case map[string]any:
		keys := make([]string, 0, len(x))
		for k := range x {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		for _, k := range keys {
			p := s.Properties[k]
			if p == nil {
				add("field %q is not in results.schema.json (document it there)", k)
				continue
			}
			p.validate(path+"."+k, x[k], errs)
		}
		for _, r := range s.Required {
			if _, ok := x[r]; !ok {
				add("required field %q missing", r)
			}
		}
	}
}

func loadSchema(t *testing.T) *schema {
	t.Helper()
	var s schema
	if err := json.Unmarshal(experiment.ResultsSchema(), &s); err != nil {
		t.Fatal(err)
	}
	return &s
}

// validateFile checks a results.json against the schema and returns the
// problems.
func validateFile(t *testing.T, s *schema, data []byte) []string {
	t.Helper()
	dec := json.NewDecoder(strings.NewReader(string(data)))
	dec.UseNumber()
	var v any
	if err := dec.Decode(&v); err != nil {
		t.Fatal(err)
	}
	var errs []string
	s.validate("results.json", v, &errs)
	return errs
}

// TestResultsSchema checks the results.json of a real (small) run against
// results.schema.json: every field of the file is described there with
// its type, every required field is present, and every node of the schema
// has a type and a description and lets no undocumented field through. A
// new field of Record, Summary or the configuration fails this test until
// the schema describes it.
func TestResultsSchema(t *testing.T) {
	s := loadSchema(t)
	var lint []string
	s.lint("schema", &lint)
	for _, e := range lint {
		t.Error(e)
	}
	if s.Schema != "https://json-schema.org/draft/2020-12/schema" {
		t.Errorf("$schema %q", s.Schema)
	}

	e := tinyExperiment(t, 2)
	e.Methods = e.Methods[1:]
	e.Methods[0].Steps = 2000
	res, err := e.Run()
	if err != nil {
		t.Fatal(err)
	}
	rep, err := experiment.NewReport(e, res, "invented data")
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "results.json")
	if err := rep.WriteJSON(path); err != nil {
		t.Fatal(err)
	}
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range validateFile(t, s, data) {
		t.Error(e)
	}

	// The check can fail: an undocumented field in a record, a wrong type,
	// a missing required field.
	for _, tc := range []struct{ old, new, want string }{
		{`"normalised":`, `"psi_error": 0.5, "normalised":`, `results.json.results.records[]: field "psi_error" is not in results.schema.json`},
		{`"budget":`, `"budget": "many", "x_budget":`, `results.json.results.records[].budget: a JSON string`},
		{`"go_version":`, `"go_versio":`, `results.json: required field "go_version" missing`},
	} {
		bad := strings.Replace(string(data), tc.old, tc.new, 1)
		if bad == string(data) {
			t.Fatalf("%q not in results.json", tc.old)
		}
		errs := validateFile(t, s, []byte(bad))
		if !slices.ContainsFunc(errs, func(e string) bool { return strings.HasPrefix(e, tc.want) }) {
			t.Errorf("%s -> %s: problems %q do not include %q", tc.old, tc.new, errs, tc.want)
		}
	}
}
