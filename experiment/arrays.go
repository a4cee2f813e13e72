package experiment

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strings"
	"unicode/utf8"

	"codeberg.org/sbinet/npyio"

	"github.com/successor-go/successor"
	"github.com/successor-go/successor/internal/errs"
	"github.com/successor-go/successor/internal/fileio"
)

// ErrCorrupt is wrapped by errors about an array manifest that cannot be
// read or an array file that does not match its manifest entry. It is the
// library's shared value (the other packages' ErrCorrupt).
var ErrCorrupt = errs.Corrupt

// Array folder format: the name and version written into every manifest,
// and the manifest's file name.
const (
	ManifestFormat  = "successor-arrays"
	ManifestVersion = 1
	ManifestFile    = "manifest.json"
)

// Array is one array of an array folder (WriteArrays), written as the NumPy
// file <Name>.npy.
//
// Data holds the values in row-major (C) order, one of:
//
//   - []float64 (NumPy dtype <f8) or []int64 (<i8), with Shape giving the
//     dimensions (their product is len(Data));
//   - a slice of a struct type, such as []Record or []Summary: a structured
//     array of shape (len(Data),), one field per exported struct field,
//     named by its json tag (fields tagged "-" are left out), with dtype
//     <f8 for float64, <i8 for int and int64, <u8 for uint64, |b1 for bool
//     and <Un for string (n the longest value in characters, at least 1).
//     Shape is ignored and set by WriteArrays. New fields of the struct
//     flow into the file with no change here.
//
// Empty arrays are refused (NumPy cannot read a zero-size array written
// by the NPY module used here).
type Array struct {
	// Name is the file stem: letters, digits, '_' and '-'.
	Name string
	// Description says what the array holds, for the manifest.
	Description string
	// Axes names each dimension (len(Shape) names), for example
	// {"state", "feature"}; for a structured array, one name for its rows.
	Axes []string
	// Shape is the size of each dimension.
	Shape []int
	// Labels optionally names the positions along some axes, keyed by
	// axis name (for example the place names of a feature axis); each
	// list has that axis's length.
	Labels map[string][]string
	// Data holds the values (see above).
	Data any
}

// Manifest describes an array folder: the file manifest.json, our own JSON
// format. Its fields are:
//
//	format           "successor-arrays"
//	version          1
//	library_version  successor.Version of the writer
//	notes            free-form remarks of the writer (optional)
//	arrays           one ArrayInfo per file, in the order written
type Manifest struct {
	Format  string      `json:"format"`
	Version int         `json:"version"`
	Library string      `json:"library_version"`
	Notes   []string    `json:"notes,omitempty"`
	Arrays  []ArrayInfo `json:"arrays"`
}

// ArrayInfo is the manifest entry of one array file:
//
//	name         the array's name
//	file         its file name in the folder (<name>.npy)
//	description  what it holds
//	dtype        the NumPy dtype string (numpy.dtype.str) of a plain
//	             array, "<f8" or "<i8"; "structured" for a structured one
//	fields       for a structured array, each field's name and dtype
//	shape        the size of each dimension
//	axes         the name of each dimension
//	labels       names of the positions along some axes (optional)
//	sha256       SHA-256 of the whole .npy file, in hex
type ArrayInfo struct {
	Name        string              `json:"name"`
	File        string              `json:"file"`
	Description string              `json:"description"`
	DType       string              `json:"dtype"`
	Fields      []FieldInfo         `json:"fields,omitempty"`
	Shape       []int               `json:"shape"`
	Axes        []string            `json:"axes"`
	Labels      map[string][]string `json:"labels,omitempty"`
	SHA256      string              `json:"sha256"`
}

// FieldInfo is one field of a structured array: its name and NumPy dtype
// string.
type FieldInfo struct {
	Name  string `json:"name"`
	DType string `json:"dtype"`
}

// WriteArrays writes every array as dir/<Name>.npy (NumPy format 1.0 or
// 2.0, little-endian, C order) and then the manifest dir/manifest.json
// naming each array with its shape, dtype, axes and SHA-256; dir is
// created if missing. Every file is written atomically (fileio.WriteAtomic),
// the manifest last, so a manifest lists only complete files. notes go
// into the manifest. It returns the manifest, or an error wrapping
// ErrConfig for an invalid array (bad name, shape, axes or labels, an
// empty array, a duplicate name, an unsupported data or field type).
//
// In Python, numpy.load(path) reads each file; the manifest is plain JSON.
func WriteArrays(dir string, arrays []Array, notes ...string) (*Manifest, error) {
	man := &Manifest{Format: ManifestFormat, Version: ManifestVersion, Library: successor.Version, Notes: notes}
	seen := map[string]bool{}
	type file struct {
		name string
		data []byte
	}
	var files []file
	for _, a := range arrays {
		if seen[a.Name] {
			return nil, fmt.Errorf("experiment: array %q listed twice: %w", a.Name, ErrConfig)
		}
		seen[a.Name] = true
		info, data, err := encodeArray(a)
		if err != nil {
			return nil, err
		}
		man.Arrays = append(man.Arrays, info)
		files = append(files, file{info.File, data})
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("experiment: arrays: %w", err)
	}
	for _, f := range files {
		if err := fileio.WriteAtomic(filepath.Join(dir, f.name), f.data, fileio.FileMode); err != nil {
			return nil, fmt.Errorf("experiment: arrays: %w", err)
		}
	}
	var b bytes.Buffer
	enc := json.NewEncoder(&b)
	enc.SetEscapeHTML(false) // keep dtypes such as "<f8" readable
	enc.SetIndent("", "  ")
	if err := enc.Encode(man); err != nil {
		return nil, fmt.Errorf("experiment: arrays: %w", err)
	}
	if err := fileio.WriteAtomic(filepath.Join(dir, ManifestFile), b.Bytes(), fileio.FileMode); err != nil {
		return nil, fmt.Errorf("experiment: arrays: %w", err)
	}
	return man, nil
}

// validName reports whether s is a usable file stem.
func validName(s string) bool {
	if s == "" || len(s) > 128 {
		return false
	}
	for _, r := range s {
		if !(r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9' || r == '_' || r == '-') {
			return false
		}
	}
	return true
}

// encodeArray checks a and returns its manifest entry and its .npy bytes.
func encodeArray(a Array) (ArrayInfo, []byte, error) {
	bad := func(format string, args ...any) error {
		return fmt.Errorf("experiment: array %q: %s: %w", a.Name, fmt.Sprintf(format, args...), ErrConfig)
	}
	if !validName(a.Name) {
		return ArrayInfo{}, nil, bad("name must be 1 to 128 letters, digits, '_' or '-'")
	}
	info := ArrayInfo{Name: a.Name, File: a.Name + ".npy", Description: a.Description,
		Axes: slices.Clone(a.Axes), Shape: slices.Clone(a.Shape)}
	var value any
	switch d := a.Data.(type) {
	case []float64:
		info.DType = "<f8"
		v, err := nest(d, a.Shape)
		if err != nil {
			return ArrayInfo{}, nil, bad("%v", err)
		}
		value = v
	case []int64:
		info.DType = "<i8"
		v, err := nest(d, a.Shape)
		if err != nil {
			return ArrayInfo{}, nil, bad("%v", err)
		}
		value = v
	default:
		v, fields, n, err := structured(a.Data)
		if err != nil {
			return ArrayInfo{}, nil, bad("%v", err)
		}
		info.DType, info.Fields, info.Shape = "structured", fields, []int{n}
		value = v
	}
	if len(info.Axes) != len(info.Shape) {
		return ArrayInfo{}, nil, bad("%d axis names for %d dimensions", len(info.Axes), len(info.Shape))
	}
	for ax, names := range a.Labels {
		i := slices.Index(info.Axes, ax)
		if i < 0 || len(names) != info.Shape[i] {
			return ArrayInfo{}, nil, bad("labels of axis %q do not match an axis of that length", ax)
		}
	}
	if len(a.Labels) > 0 {
		info.Labels = make(map[string][]string, len(a.Labels))
		for k, v := range a.Labels {
			info.Labels[k] = slices.Clone(v)
		}
	}
	var buf bytes.Buffer
	if err := writeNPY(&buf, value); err != nil {
		return ArrayInfo{}, nil, bad("npy: %v", err)
	}
	sum := sha256.Sum256(buf.Bytes())
	info.SHA256 = hex.EncodeToString(sum[:])
	return info, buf.Bytes(), nil
}

// writeNPY writes v with the NPY module, turning a panic of the module
// (it panics on some layouts it cannot describe) into an error.
func writeNPY(w io.Writer, v any) (err error) {
	defer func() {
		if r := recover(); r != nil {
			err = fmt.Errorf("npy writer: %v", r)
		}
	}()
	return npyio.Write(w, v)
}

// nest returns flat as nested slices of the given shape ([]T for one
// dimension, [][]T for two, ...) sharing flat's memory, which the NPY
// writer stores with that shape.
func nest[T float64 | int64](flat []T, shape []int) (any, error) {
	if len(shape) == 0 {
		return nil, errors.New("no dimensions")
	}
	n := 1
	for _, d := range shape {
		if d < 1 {
			return nil, fmt.Errorf("shape %v: every dimension must be at least 1", shape)
		}
		if n > math.MaxInt/d {
			return nil, fmt.Errorf("shape %v too large", shape)
		}
		n *= d
	}
	if n != len(flat) {
		return nil, fmt.Errorf("shape %v holds %d values, data has %d", shape, n, len(flat))
	}
	v := reflect.ValueOf(flat)
	// Group the innermost dimension first.
	for k := len(shape) - 1; k > 0; k-- {
		d := shape[k]
		outer := reflect.MakeSlice(reflect.SliceOf(v.Type()), v.Len()/d, v.Len()/d)
		for i := range outer.Len() {
			outer.Index(i).Set(v.Slice(i*d, (i+1)*d))
		}
		v = outer
	}
	return v.Interface(), nil
}

// structured returns data (a non-empty slice of structs) as a slice of a
// struct type the NPY writer stores as a structured array (fields named
// by their json tags, int as int64), with the fields' dtypes and the
// number of rows.
func structured(data any) (any, []FieldInfo, int, error) {
	v := reflect.ValueOf(data)
	if !v.IsValid() || v.Kind() != reflect.Slice || v.Type().Elem().Kind() != reflect.Struct {
		return nil, nil, 0, fmt.Errorf("data of type %T: want []float64, []int64 or a slice of structs", data)
	}
	if v.Len() == 0 {
		return nil, nil, 0, errors.New("no rows")
	}
	et := v.Type().Elem()
	var fields []reflect.StructField
	var infos []FieldInfo
	var src []int // index in et of each kept field
	for i := range et.NumField() {
		f := et.Field(i)
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
		var t reflect.Type
		var dtype string
		switch f.Type.Kind() {
		case reflect.Float64:
			t, dtype = reflect.TypeFor[float64](), "<f8"
		case reflect.Int, reflect.Int64:
			t, dtype = reflect.TypeFor[int64](), "<i8"
		case reflect.Uint64:
			t, dtype = reflect.TypeFor[uint64](), "<u8"
		case reflect.Bool:
			t, dtype = reflect.TypeFor[bool](), "|b1"
		case reflect.String:
			t = reflect.TypeFor[string]()
			n := 1
			for r := range v.Len() {
				n = max(n, utf8.RuneCountInString(v.Index(r).Field(i).String()))
			}
			dtype = fmt.Sprintf("<U%d", n)
		default:
			return nil, nil, 0, fmt.Errorf("field %s of type %v: want a number, bool or string", f.Name, f.Type)
		}
		fields = append(fields, reflect.StructField{Name: f.Name, Type: t, Tag: reflect.StructTag(`npy:"` + name + `"`)})
		infos = append(infos, FieldInfo{Name: name, DType: dtype})
		src = append(src, i)
	}
	if len(fields) == 0 {
		return nil, nil, 0, errors.New("no fields")
	}
	st := reflect.StructOf(fields)
	out := reflect.MakeSlice(reflect.SliceOf(st), v.Len(), v.Len())
	for r := range v.Len() {
		row := v.Index(r)
		for j, i := range src {
			out.Index(r).Field(j).Set(row.Field(i).Convert(fields[j].Type))
		}
	}
	// The NPY module sizes a string field by the first row and, in
	// v0.14.0, lays out the fields wrongly (or panics) when a later row
	// widens one. Pad the first row's strings with NULs to the width of
	// the field: NumPy's fixed-width strings are NUL-padded anyway, and
	// numpy returns them without the padding.
	for j, f := range fields {
		if f.Type.Kind() != reflect.String {
			continue
		}
		var width int
		fmt.Sscanf(infos[j].DType, "<U%d", &width)
		first := out.Index(0).Field(j)
		pad := width - utf8.RuneCountInString(first.String())
		first.SetString(first.String() + strings.Repeat("\x00", pad))
	}
	return out.Interface(), infos, v.Len(), nil
}

// ReadManifest reads and checks the manifest of an array folder: its
// format name and version, a known dtype, a valid file name and matching
// shape, axes and labels for every entry. Errors wrap ErrCorrupt (or the
// file system's error).
func ReadManifest(path string) (*Manifest, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("experiment: manifest: %w", err)
	}
	return parseManifest(b)
}

func parseManifest(b []byte) (*Manifest, error) {
	var m Manifest
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&m); err != nil {
		return nil, fmt.Errorf("experiment: manifest: %v: %w", err, ErrCorrupt)
	}
	if dec.More() {
		return nil, fmt.Errorf("experiment: manifest: trailing data: %w", ErrCorrupt)
	}
	if m.Format != ManifestFormat || m.Version != ManifestVersion {
		return nil, fmt.Errorf("experiment: manifest: format %q version %d, want %q version %d: %w", m.Format, m.Version, ManifestFormat, ManifestVersion, ErrCorrupt)
	}
	seen := map[string]bool{}
	for _, a := range m.Arrays {
		bad := func(what string) error {
			return fmt.Errorf("experiment: manifest: array %q: %s: %w", a.Name, what, ErrCorrupt)
		}
		switch {
		case !validName(a.Name) || a.File != a.Name+".npy":
			return nil, bad("bad name or file")
		case seen[a.Name]:
			return nil, bad("listed twice")
		case len(a.Shape) == 0 || len(a.Axes) != len(a.Shape):
			return nil, bad("shape and axes do not match")
		case len(a.SHA256) != 64:
			return nil, bad("no sha256")
		}
		seen[a.Name] = true
		for _, d := range a.Shape {
			if d < 1 {
				return nil, bad("empty dimension")
			}
		}
		switch a.DType {
		case "<f8", "<i8":
			if len(a.Fields) != 0 {
				return nil, bad("fields of a plain array")
			}
		case "structured":
			if len(a.Fields) == 0 || len(a.Shape) != 1 {
				return nil, bad("structured array without fields or not one-dimensional")
			}
		default:
			return nil, bad("unknown dtype " + a.DType)
		}
		for ax, names := range a.Labels {
			i := slices.Index(a.Axes, ax)
			if i < 0 || len(names) != a.Shape[i] {
				return nil, bad("labels do not match an axis")
			}
		}
	}
	return &m, nil
}

// Verify checks that every array file of the manifest is present in dir
// with the SHA-256 the manifest records. Errors wrap ErrCorrupt (or the
// file system's error).
func (m *Manifest) Verify(dir string) error {
	for _, a := range m.Arrays {
		b, err := os.ReadFile(filepath.Join(dir, a.File))
		if err != nil {
			return fmt.Errorf("experiment: arrays: %w", err)
		}
		sum := sha256.Sum256(b)
		if hex.EncodeToString(sum[:]) != a.SHA256 {
			return fmt.Errorf("experiment: arrays: %s does not match its checksum: %w", a.File, ErrCorrupt)
		}
	}
	return nil
}

// RecordsArray returns the records of res as the structured array
// "records" (one row per scored policy, the fields of Record).
func RecordsArray(res *Results) Array {
	return Array{Name: "records", Description: "one row per scored policy (fields of experiment.Record; normalised: 0 = uniform random policy, 1 = optimal)",
		Axes: []string{"record"}, Data: res.Records}
}

// SummaryArray returns the summary of res as the structured array
// "summary" (one row per variant, job and budget, the fields of Summary;
// job "mean" is the mean over jobs).
func SummaryArray(res *Results) Array {
	return Array{Name: "summary", Description: "mean and standard error over seeds per variant, job and budget (fields of experiment.Summary; job \"mean\" is the per-seed mean over jobs)",
		Axes: []string{"row"}, Data: res.Summary}
}
