package experiment_test

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strconv"
	"strings"
	"testing"

	"codeberg.org/sbinet/npyio"

	"github.com/successor-go/successor/experiment"
	"github.com/successor-go/successor/internal/npytest"
)

// specialFloats are float64 values whose bits a writer or reader could
// change: signed zeros, infinities, NaNs with payloads, subnormals and the
// extremes (IEEE 754-2008, section 3.4).
var specialFloats = []float64{
	0, math.Copysign(0, -1), 1, -1, math.Inf(1), math.Inf(-1), math.NaN(),
	math.Float64frombits(0x7ff8_0000_0000_0abc), math.Float64frombits(0xfff0_0000_0000_0001),
	math.SmallestNonzeroFloat64, -math.SmallestNonzeroFloat64, math.MaxFloat64, 0.1, 1.0 / 3,
}

// testArrays returns arrays of every supported kind: floats with special
// values and random bits in 1 to 4 dimensions, int64 extremes, and
// structured arrays of records and summaries with non-ASCII strings.
func testArrays() []experiment.Array {
	rng := rand.New(rand.NewPCG(7, 8))
	randBits := func(n int) []float64 {
		x := make([]float64, n)
		for i := range x {
			x[i] = math.Float64frombits(rng.Uint64())
		}
		return x
	}
	recs := []experiment.Record{
		{Variant: "vmf:usf+gpi", Job: "bench", Budget: 50, Seed: 1, Normalised: 0.25, Value: math.Copysign(0, -1), RSquared: math.NaN(), Residual: math.Inf(1), Rewarded: 3, Lambda: 1e-300},
		{Variant: "q-learning", Job: "dépôt-ü", Budget: 1000, Seed: math.MaxUint64, Normalised: -1.5, Value: math.SmallestNonzeroFloat64, Rewarded: math.MaxInt64},
		{Variant: "x", Job: "y", Budget: -7, Normalised: math.MaxFloat64, Lambda: math.Float64frombits(rng.Uint64())},
	}
	// Strings that widen after the first row (the NPY module mislays such
	// fields unless the first row is padded).
	widening := []experiment.Record{
		{Variant: "vmf:usf+gpi", Job: "bench"},
		{Variant: "vmf:model-fit+gpi", Job: "bench"},
		{Variant: "vmf:usf+gpi", Job: "dock-no-lane"},
		{Variant: "categorical:model-fit+gpi", Job: "é"},
	}
	sums := []experiment.Summary{
		{Variant: "given:usf+gpi", Job: "mean", Budget: 200, Mean: 0.5, StdErr: math.NaN(), RSquared: 1, N: 1},
		{Variant: "sf-q-learning", Job: "bays", Budget: 1, Mean: math.Copysign(0, -1), StdErr: 0.125, N: 5},
	}
	return []experiment.Array{
		{Name: "special", Description: "special values", Axes: []string{"i"}, Shape: []int{len(specialFloats)}, Data: specialFloats},
		{Name: "matrix", Axes: []string{"state", "state"}, Shape: []int{7, 5}, Data: randBits(35),
			Labels: map[string][]string{"state": {"a", "b", "c", "d", "e", "f", "g"}}},
		{Name: "psi_table", Axes: []string{"state", "action", "feature"}, Shape: []int{4, 3, 2}, Data: randBits(24)},
		{Name: "four-d", Axes: []string{"a", "b", "c", "d"}, Shape: []int{2, 3, 1, 2}, Data: randBits(12)},
		{Name: "ints", Axes: []string{"state", "coordinate"}, Shape: []int{2, 3}, Data: []int64{0, -1, math.MaxInt64, math.MinInt64, 42, 7},
			Labels: map[string][]string{"coordinate": {"row", "col", "x"}}},
		{Name: "records", Axes: []string{"record"}, Data: recs},
		{Name: "widening", Axes: []string{"record"}, Data: widening},
		{Name: "summary", Axes: []string{"row"}, Data: sums},
	}
}

// bitsOf returns the values of a plain array as NumPy's check prints them.
func bitsOf(data any) []string {
	var out []string
	switch d := data.(type) {
	case []float64:
		for _, v := range d {
			out = append(out, strconv.FormatUint(math.Float64bits(v), 10))
		}
	case []int64:
		for _, v := range d {
			out = append(out, strconv.FormatInt(v, 10))
		}
	}
	return out
}

// columnsOf returns the columns of a slice of structs keyed by json name,
// as NumPy's check prints them.
func columnsOf(data any) map[string][]string {
	v := reflect.ValueOf(data)
	t := v.Type().Elem()
	out := map[string][]string{}
	for i := range t.NumField() {
		name, _, _ := strings.Cut(t.Field(i).Tag.Get("json"), ",")
		if name == "-" {
			continue
		}
		for r := range v.Len() {
			f := v.Index(r).Field(i)
			var s string
			switch f.Kind() {
			case reflect.Float64:
				s = strconv.FormatUint(math.Float64bits(f.Float()), 10)
			case reflect.Int, reflect.Int64:
				s = strconv.FormatInt(f.Int(), 10)
			case reflect.Uint64:
				s = strconv.FormatUint(f.Uint(), 10)
			case reflect.Bool:
				s = strconv.FormatBool(f.Bool())
			case reflect.String:
				s = f.String()
			}
			out[name] = append(out[name], s)
		}
	}
	return out
}

// TestWriteArraysNumPy writes arrays of every kind and reads them back with
// NumPy (numpy.load): every file the manifest lists loads with the dtype,
// shape and SHA-256 the manifest states, and every value is bit-identical
// to what was written (float64 compared as their uint64 bits).
func TestWriteArraysNumPy(t *testing.T) {
	dir := t.TempDir()
	arrays := testArrays()
	man, err := experiment.WriteArrays(dir, arrays, "test arrays")
	if err != nil {
		t.Fatal(err)
	}
	back, err := experiment.ReadManifest(filepath.Join(dir, experiment.ManifestFile))
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(back, man) {
		t.Errorf("manifest read back differs:\n%+v\n%+v", back, man)
	}
	if err := back.Verify(dir); err != nil {
		t.Error(err)
	}
	got, version := npytest.Load(t, dir)
	t.Logf("numpy %s", version)
	if len(got) != len(arrays) {
		t.Errorf("numpy read %d arrays, want %d", len(got), len(arrays))
	}
	for i, a := range arrays {
		info := man.Arrays[i]
		l, ok := got[a.Name]
		if !ok {
			t.Errorf("%s: not read", a.Name)
			continue
		}
		if l.SHA256 != info.SHA256 || l.DType != info.DType || !slices.Equal(l.Shape, info.Shape) {
			t.Errorf("%s: numpy sees %s %v sha %s, manifest says %s %v sha %s", a.Name, l.DType, l.Shape, l.SHA256, info.DType, info.Shape, info.SHA256)
		}
		if info.DType == "structured" {
			var want []npytest.Field
			for _, f := range info.Fields {
				want = append(want, npytest.Field{Name: f.Name, DType: f.DType})
			}
			if !reflect.DeepEqual(l.Fields, want) {
				t.Errorf("%s: numpy fields %v, manifest %v", a.Name, l.Fields, want)
			}
			if w := columnsOf(a.Data); !reflect.DeepEqual(l.Columns, w) {
				t.Errorf("%s: columns differ:\nnumpy %v\nwant  %v", a.Name, l.Columns, w)
			}
			if len(info.Shape) != 1 || info.Shape[0] != reflect.ValueOf(a.Data).Len() {
				t.Errorf("%s: shape %v", a.Name, info.Shape)
			}
			continue
		}
		if !slices.Equal(info.Shape, a.Shape) {
			t.Errorf("%s: manifest shape %v, want %v", a.Name, info.Shape, a.Shape)
		}
		if w := bitsOf(a.Data); !slices.Equal(l.Values, w) {
			t.Errorf("%s: values differ:\nnumpy %v\nwant  %v", a.Name, l.Values, w)
		}
	}
	// The Go reader of the same module agrees too (float64 by bits).
	f, err := os.Open(filepath.Join(dir, "special.npy"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var x []float64
	if err := npyio.Read(f, &x); err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(bitsOf(x), bitsOf(specialFloats)) {
		t.Errorf("npyio read back %v", x)
	}
}

// TestWriteArraysErrors: invalid arrays are refused with ErrConfig before
// anything is written.
func TestWriteArraysErrors(t *testing.T) {
	ok := experiment.Array{Name: "a", Axes: []string{"i"}, Shape: []int{2}, Data: []float64{1, 2}}
	for _, tc := range []struct {
		name string
		a    []experiment.Array
	}{
		{"bad name", []experiment.Array{{Name: "a/b", Axes: []string{"i"}, Shape: []int{1}, Data: []float64{1}}}},
		{"empty name", []experiment.Array{{Axes: []string{"i"}, Shape: []int{1}, Data: []float64{1}}}},
		{"twice", []experiment.Array{ok, ok}},
		{"shape", []experiment.Array{{Name: "a", Axes: []string{"i"}, Shape: []int{3}, Data: []float64{1, 2}}}},
		{"zero dimension", []experiment.Array{{Name: "a", Axes: []string{"i", "j"}, Shape: []int{0, 2}, Data: []float64{}}}},
		{"no shape", []experiment.Array{{Name: "a", Data: []float64{1}}}},
		{"axes", []experiment.Array{{Name: "a", Axes: []string{"i", "j"}, Shape: []int{2}, Data: []float64{1, 2}}}},
		{"labels length", []experiment.Array{{Name: "a", Axes: []string{"i"}, Shape: []int{2}, Data: []float64{1, 2}, Labels: map[string][]string{"i": {"x"}}}}},
		{"labels axis", []experiment.Array{{Name: "a", Axes: []string{"i"}, Shape: []int{2}, Data: []float64{1, 2}, Labels: map[string][]string{"j": {"x", "y"}}}}},
		{"type", []experiment.Array{{Name: "a", Axes: []string{"i"}, Shape: []int{2}, Data: []float32{1, 2}}}},
		{"nil", []experiment.Array{{Name: "a", Axes: []string{"i"}, Shape: []int{2}}}},
		{"no rows", []experiment.Array{{Name: "a", Axes: []string{"r"}, Data: []experiment.Record{}}}},
		{"field type", []experiment.Array{{Name: "a", Axes: []string{"r"}, Data: []struct{ X []float64 }{{}}}}},
		{"no fields", []experiment.Array{{Name: "a", Axes: []string{"r"}, Data: []struct{ x int }{{}}}}},
	} {
		dir := filepath.Join(t.TempDir(), "out")
		_, err := experiment.WriteArrays(dir, tc.a)
		if !errors.Is(err, experiment.ErrConfig) {
			t.Errorf("%s: got %v, want ErrConfig", tc.name, err)
		}
		if _, err := os.Stat(dir); !os.IsNotExist(err) {
			t.Errorf("%s: folder written despite the error", tc.name)
		}
	}
}

// TestManifestCorrupt: a manifest edited by hand or an array file changed
// after writing is refused with ErrCorrupt.
func TestManifestCorrupt(t *testing.T) {
	dir := t.TempDir()
	man, err := experiment.WriteArrays(dir, testArrays())
	if err != nil {
		t.Fatal(err)
	}
	good, err := os.ReadFile(filepath.Join(dir, experiment.ManifestFile))
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct{ old, new string }{
		{`"successor-arrays"`, `"other"`},
		{`"version": 1`, `"version": 2`},
		{`"dtype": "<f8"`, `"dtype": "<f4"`},
		{`"file": "special.npy"`, `"file": "../special.npy"`},
		{`"name": "special"`, `"name": "matrix"`},
		{`"shape": [
        7,
        5
      ]`, `"shape": [7]`},
		{`"shape": [
        7,`, `"shape": [0,`},
		{`"shape": [
        7,
        5
      ]`, `"shape": []`},
		{`"format"`, `"extra": 1, "format"`},
		{`"dtype": "structured"`, `"dtype": "<f8"`},
		{`"labels": {
        "state"`, `"labels": {
        "nope"`},
	} {
		bad := bytes.Replace(good, []byte(tc.old), []byte(tc.new), 1)
		if bytes.Equal(bad, good) {
			t.Fatalf("%q not in the manifest", tc.old)
		}
		p := filepath.Join(t.TempDir(), "m.json")
		if err := os.WriteFile(p, bad, 0o644); err != nil {
			t.Fatal(err)
		}
		if _, err := experiment.ReadManifest(p); !errors.Is(err, experiment.ErrCorrupt) {
			t.Errorf("%s -> %s: got %v, want ErrCorrupt", tc.old, tc.new, err)
		}
	}
	for _, b := range [][]byte{good[:len(good)/2], append(slices.Clone(good), '{'), nil} {
		p := filepath.Join(t.TempDir(), "m.json")
		if err := os.WriteFile(p, b, 0o644); err != nil {
			t.Fatal(err)
		}
		if _, err := experiment.ReadManifest(p); !errors.Is(err, experiment.ErrCorrupt) {
			t.Errorf("truncated or trailing: got %v, want ErrCorrupt", err)
		}
	}
	// One changed byte in a data file.
	p := filepath.Join(dir, "matrix.npy")
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	b[len(b)-1] ^= 1
	if err := os.WriteFile(p, b, 0o644); err != nil {
		t.Fatal(err)
	}
	if err := man.Verify(dir); !errors.Is(err, experiment.ErrCorrupt) {
		t.Errorf("changed file: got %v, want ErrCorrupt", err)
	}
	if err := os.Remove(p); err != nil {
		t.Fatal(err)
	}
	if err := man.Verify(dir); err == nil {
		t.Error("missing file verified")
	}
}

// ExampleWriteArrays writes a 2 x 3 array and prints its manifest entry;
// numpy.load("dir/successor.npy") reads it in Python.
func ExampleWriteArrays() {
	dir, err := os.MkdirTemp("", "arrays")
	if err != nil {
		fmt.Println(err)
		return
	}
	defer os.RemoveAll(dir)
	man, err := experiment.WriteArrays(dir, []experiment.Array{{
		Name: "successor", Description: "rows of a successor matrix",
		Axes: []string{"from", "to"}, Shape: []int{2, 3}, Data: []float64{1, 0.5, 0.25, 0, 1, 0.5},
	}})
	if err != nil {
		fmt.Println(err)
		return
	}
	a := man.Arrays[0]
	fmt.Println(a.File, a.DType, a.Shape, a.Axes)
	// Output:
	// successor.npy <f8 [2 3] [from to]
}
