package sf

import (
	"bytes"
	"encoding/binary"
	"errors"
	"hash/crc32"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"testing"

	"github.com/successor-go/successor/internal/fileio"
)

func sampleTable() *Table {
	t, _ := NewTable(2, 3, 2)
	vals := []float64{0, math.Copysign(0, -1), 1.5, -2.25, -math.MaxFloat64, math.Float64frombits(0x000f000000000123),
		math.SmallestNonzeroFloat64, math.MaxFloat64, 1e-300, 3, 4, 5}
	copy(t.Data, vals)
	return t
}

func sameBits(x, y []float64) bool {
	if len(x) != len(y) {
		return false
	}
	for i := range x {
		if math.Float64bits(x[i]) != math.Float64bits(y[i]) {
			return false
		}
	}
	return true
}

// TestSaveLoad checks bit-exact round trips through files (subnormals,
// extremes and signed zero included) and that no temporary file is left
// behind.
func TestSaveLoad(t *testing.T) {
	dir := t.TempDir()
	tb := sampleTable()
	path := filepath.Join(dir, "psi.sft")
	if err := tb.Save(path); err != nil {
		t.Fatal(err)
	}
	if err := tb.Save(path); err != nil { // overwrite
		t.Fatal(err)
	}
	got, err := LoadTable(path)
	if err != nil {
		t.Fatal(err)
	}
	if fi, err := os.Stat(path); err != nil {
		t.Error(err)
	} else if runtime.GOOS != "windows" && fi.Mode().Perm() != 0o644 {
		t.Errorf("saved file has mode %v, want 0644", fi.Mode().Perm())
	}
	if got.S != tb.S || got.A != tb.A || got.D != tb.D || !sameBits(got.Data, tb.Data) {
		t.Errorf("table round trip: got %+v, want %+v", got, tb)
	}

	lin, _ := NewLinear(2, 3, 4)
	for i := range lin.W {
		lin.W[i] = float64(i) / 7
	}
	lpath := filepath.Join(dir, "w.sfl")
	if err := lin.Save(lpath); err != nil {
		t.Fatal(err)
	}
	lgot, err := LoadLinear(lpath)
	if err != nil {
		t.Fatal(err)
	}
	if lgot.A != 2 || lgot.D != 3 || lgot.M != 4 || !sameBits(lgot.W, lin.W) {
		t.Errorf("linear round trip: got %+v", lgot)
	}
	if _, err := LoadTable(lpath); !errors.Is(err, ErrCorrupt) {
		t.Errorf("linear file loaded as a table: err = %v, want ErrCorrupt", err)
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 2 {
		t.Errorf("directory holds %d entries, want 2 (no temporary files)", len(ents))
	}
	if _, err := LoadTable(filepath.Join(dir, "missing")); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("missing file: err = %v", err)
	}
	if err := tb.Save(filepath.Join(dir, "no", "such", "dir")); err == nil {
		t.Error("save into a missing directory: no error")
	}
}

// TestLoadCorrupt checks that every truncation and every single-bit flip of
// a saved table is rejected with ErrCorrupt (CRC-32 detects all single-bit
// errors; a flip in a size field is caught by the length check).
func TestLoadCorrupt(t *testing.T) {
	b, err := sampleTable().MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	var tb Table
	for n := 0; n < len(b); n++ {
		if err := tb.UnmarshalBinary(b[:n]); !errors.Is(err, ErrCorrupt) {
			t.Fatalf("truncated to %d bytes: err = %v, want ErrCorrupt", n, err)
		}
	}
	if err := tb.UnmarshalBinary(append(bytes.Clone(b), 0)); !errors.Is(err, ErrCorrupt) {
		t.Errorf("extra byte: err = %v, want ErrCorrupt", err)
	}
	for i := range b {
		for bit := 0; bit < 8; bit++ {
			c := bytes.Clone(b)
			c[i] ^= 1 << bit
			if err := tb.UnmarshalBinary(c); !errors.Is(err, ErrCorrupt) {
				t.Fatalf("bit %d of byte %d flipped: err = %v, want ErrCorrupt", bit, i, err)
			}
		}
	}
	if tb.Data != nil {
		t.Error("a failed load changed the table")
	}
	// Sizes out of range, with a valid checksum: each is refused before
	// anything of their product is allocated.
	for _, tc := range []struct {
		name  string
		sizes [3]uint64
	}{
		{"zero", [3]uint64{0, 3, 2}},
		{"negative", [3]uint64{2, math.MaxUint64, 2}},
		{"2^31-1", [3]uint64{1<<31 - 1, 3, 2}},
		{"product overflows", [3]uint64{1 << 31, 1 << 31, 1 << 31}},
	} {
		if err := tb.UnmarshalBinary(withSizes(b, tc.sizes)); !errors.Is(err, ErrCorrupt) {
			t.Errorf("sizes %s: err = %v, want ErrCorrupt", tc.name, err)
		}
	}
	old := bytes.Clone(b)
	old[4] = 1 // the previous format version
	if err := tb.UnmarshalBinary(fileio.Reseal(old)); !errors.Is(err, ErrCorrupt) {
		t.Errorf("version 1: err = %v, want ErrCorrupt", err)
	}
	if _, err := (&Table{S: 2, A: 2, D: 2, Data: make([]float64, 3)}).MarshalBinary(); !errors.Is(err, ErrDimension) {
		t.Errorf("inconsistent table: err = %v, want ErrDimension", err)
	}
}

// TestNonFiniteValues checks that NaN and infinite values are refused
// both ways: Save with ErrNonFinite, and a file holding one (checksum
// recomputed) with ErrCorrupt. Such files used to load and feed NaN into
// every later use of the table.
func TestNonFiniteValues(t *testing.T) {
	for _, v := range []float64{math.NaN(), math.Float64frombits(0x7ff8000000000123), math.Inf(1), math.Inf(-1)} {
		tb := sampleTable()
		tb.Data[5] = v
		if _, err := tb.MarshalBinary(); !errors.Is(err, ErrNonFinite) {
			t.Errorf("save a table holding %v: error %v, want ErrNonFinite", v, err)
		}
		if err := tb.Save(filepath.Join(t.TempDir(), "t")); !errors.Is(err, ErrNonFinite) {
			t.Errorf("Save a table holding %v: error %v, want ErrNonFinite", v, err)
		}
		lin, _ := NewLinear(1, 2, 1)
		lin.W[1] = v
		if _, err := lin.MarshalBinary(); !errors.Is(err, ErrNonFinite) {
			t.Errorf("save a linear holding %v: error %v, want ErrNonFinite", v, err)
		}

		good, err := sampleTable().MarshalBinary()
		if err != nil {
			t.Fatal(err)
		}
		bad := bytes.Clone(good)
		binary.LittleEndian.PutUint64(bad[40+8*5:], math.Float64bits(v))
		var got Table
		if err := got.UnmarshalBinary(fileio.Reseal(bad)); !errors.Is(err, ErrCorrupt) {
			t.Errorf("load a table holding %v: error %v, want ErrCorrupt", v, err)
		}
		lb, err := (&Linear{A: 1, D: 2, M: 1, W: []float64{1, 2}}).MarshalBinary()
		if err != nil {
			t.Fatal(err)
		}
		binary.LittleEndian.PutUint64(lb[40+8:], math.Float64bits(v))
		var l Linear
		if err := l.UnmarshalBinary(fileio.Reseal(lb)); !errors.Is(err, ErrCorrupt) {
			t.Errorf("load a linear holding %v: error %v, want ErrCorrupt", v, err)
		}
	}
}

// withSizes returns a copy of the record b with its three sizes replaced
// and its checksum recomputed.
func withSizes(b []byte, sizes [3]uint64) []byte {
	c := bytes.Clone(b)
	for i, n := range sizes {
		binary.LittleEndian.PutUint64(c[fileio.HeaderLen+8*i:], n)
	}
	return fileio.Reseal(c)
}

// TestFileLayout checks a saved table byte by byte against the layout of
// the package doc ("Files").
func TestFileLayout(t *testing.T) {
	tb := sampleTable()
	b, err := tb.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	n := len(tb.Data)
	if len(b) != 40+8*n+4 || cap(b) != len(b) {
		t.Fatalf("%d bytes (capacity %d), want 40 + 8*%d + 4 allocated once", len(b), cap(b), n)
	}
	le := binary.LittleEndian
	if string(b[:4]) != "SFTB" || le.Uint32(b[4:]) != 2 || le.Uint64(b[8:]) != uint64(24+8*n) {
		t.Errorf("header % x", b[:16])
	}
	if le.Uint64(b[16:]) != 2 || le.Uint64(b[24:]) != 3 || le.Uint64(b[32:]) != 2 {
		t.Errorf("sizes % x, want 2, 3, 2", b[16:40])
	}
	for i, v := range tb.Data {
		if le.Uint64(b[40+8*i:]) != math.Float64bits(v) {
			t.Errorf("value %d: bits %x, want %x", i, le.Uint64(b[40+8*i:]), math.Float64bits(v))
		}
	}
	if le.Uint32(b[40+8*n:]) != crc32.Checksum(b[:40+8*n], crc32.MakeTable(crc32.Castagnoli)) {
		t.Error("trailer is not the CRC-32C of the rest")
	}
}

// FuzzLoadTable checks that the loader never panics and that anything it
// accepts re-encodes to the same bytes (a bit-exact round trip).
func FuzzLoadTable(f *testing.F) {
	b, _ := sampleTable().MarshalBinary()
	f.Add(b)
	f.Add(b[:40])
	small, _ := NewTable(1, 1, 1)
	sb, _ := small.MarshalBinary()
	f.Add(sb)
	// Giant headers: sizes far beyond the bytes present, one whose
	// product overflows, one with a NaN value.
	f.Add(withSizes(b, [3]uint64{1<<31 - 1, 3, 2}))
	f.Add(withSizes(b, [3]uint64{1 << 32, 1 << 16, 1 << 16}))
	f.Add(withSizes(b, [3]uint64{math.MaxInt64, math.MaxInt64, 2}))
	nan := bytes.Clone(b)
	binary.LittleEndian.PutUint64(nan[40:], math.Float64bits(math.NaN()))
	f.Add(fileio.Reseal(nan))
	f.Fuzz(func(t *testing.T, data []byte) {
		for _, data := range [][]byte{data, fileio.Reseal(data)} {
			var tb Table
			if err := tb.UnmarshalBinary(data); err != nil {
				if !errors.Is(err, ErrCorrupt) {
					t.Fatalf("error %v does not wrap ErrCorrupt", err)
				}
				continue
			}
			out, err := tb.MarshalBinary()
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(out, data) {
				t.Fatal("accepted input does not re-encode to the same bytes")
			}
		}
	})
}

// FuzzTableRoundTrip checks encode then decode of arbitrary values.
func FuzzTableRoundTrip(f *testing.F) {
	f.Add(uint8(2), uint8(1), uint8(3), []byte("seed values"))
	f.Fuzz(func(t *testing.T, s, a, d uint8, raw []byte) {
		ns, na, nd := int(s%5)+1, int(a%5)+1, int(d%5)+1
		tb, _ := NewTable(ns, na, nd)
		for i := range tb.Data {
			var u uint64
			for j := 0; j < 8 && 8*i+j < len(raw); j++ {
				u |= uint64(raw[8*i+j]) << (8 * j)
			}
			tb.Data[i] = math.Float64frombits(u)
		}
		finite := true
		for _, v := range tb.Data {
			finite = finite && !math.IsNaN(v) && !math.IsInf(v, 0)
		}
		b, err := tb.MarshalBinary()
		if !finite {
			if !errors.Is(err, ErrNonFinite) {
				t.Fatalf("non-finite values: error %v, want ErrNonFinite", err)
			}
			return
		}
		if err != nil {
			t.Fatal(err)
		}
		var got Table
		if err := got.UnmarshalBinary(b); err != nil {
			t.Fatal(err)
		}
		if got.S != ns || got.A != na || got.D != nd || !sameBits(got.Data, tb.Data) {
			t.Fatal("round trip changed the table")
		}
	})
}

// FuzzLoadLinear checks the Linear loader as FuzzLoadTable does the table's.
func FuzzLoadLinear(f *testing.F) {
	lin, _ := NewLinear(2, 2, 3)
	for i := range lin.W {
		lin.W[i] = float64(i) - 5.5
	}
	b, _ := lin.MarshalBinary()
	f.Add(b)
	f.Add(b[:len(b)-1])
	f.Add(withSizes(b, [3]uint64{2, 2, 1<<31 - 1}))
	f.Add(withSizes(b, [3]uint64{1 << 32, 1 << 16, 1 << 16}))
	f.Add(withSizes(b, [3]uint64{math.MaxInt64, math.MaxInt64, 2}))
	f.Fuzz(func(t *testing.T, data []byte) {
		for _, data := range [][]byte{data, fileio.Reseal(data)} {
			var l Linear
			if err := l.UnmarshalBinary(data); err != nil {
				if !errors.Is(err, ErrCorrupt) {
					t.Fatalf("error %v does not wrap ErrCorrupt", err)
				}
				continue
			}
			out, err := l.MarshalBinary()
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(out, data) {
				t.Fatal("accepted input does not re-encode to the same bytes")
			}
		}
	})
}
