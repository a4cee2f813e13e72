package sf

import (
	"fmt"
	"math"

	"github.com/successor-go/successor/internal/fileio"
)

// Record kinds and format version (framing in package internal/fileio,
// payload in the package doc, "Files"). Version 1 was this package's own
// framing.
const (
	formatVersion = 2
	magicTable    = "SFTB"
	magicLinear   = "SFLN"
)

func encode(what, magic string, sizes [3]int, vals []float64) ([]byte, error) {
	for i, v := range vals {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("sf: save %s: value %d is %v: %w", what, i, v, ErrNonFinite)
		}
	}
	e := fileio.NewEncoder(magic, formatVersion, 3*8+8*len(vals))
	e.Ints(sizes[:])
	e.Float64s(vals)
	b, err := e.Seal()
	if err != nil {
		return nil, fmt.Errorf("sf: save %s: %w", what, err)
	}
	return b, nil
}

func decode(what, magic string, data []byte) (sizes [3]int, vals []float64, err error) {
	d, err := fileio.Open("sf: load "+what, data, magic, formatVersion)
	if err != nil {
		return sizes, nil, err
	}
	for i := range sizes {
		sizes[i] = d.Size("sizes", 1, math.MaxInt)
	}
	vals = d.Float64s("values", d.Count("values", 8, sizes[:]...))
	if err := d.Finish(); err != nil {
		return sizes, nil, err
	}
	for i, v := range vals {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return sizes, nil, d.Fail("values", "value %d is %v", i, v)
		}
	}
	return sizes, vals, nil
}

// MarshalBinary encodes t in the format of the package doc ("Files")
// (magic, version, length, sizes, values, CRC-32C). It returns an error
// wrapping ErrDimension if len(t.Data) does not match the sizes, or
// ErrNonFinite if a value is NaN or infinite (a diverged table).
func (t *Table) MarshalBinary() ([]byte, error) {
	if t.S <= 0 || t.A <= 0 || t.D <= 0 || len(t.Data) != t.S*t.A*t.D {
		return nil, fmt.Errorf("sf: save table: sizes %d, %d, %d and %d values: %w", t.S, t.A, t.D, len(t.Data), ErrDimension)
	}
	return encode("table", magicTable, [3]int{t.S, t.A, t.D}, t.Data)
}

// UnmarshalBinary sets t from data written by MarshalBinary. On error
// (wrapping ErrCorrupt: a bad frame, sizes beyond the bytes present, a
// non-finite value) t is unchanged.
func (t *Table) UnmarshalBinary(data []byte) error {
	sz, vals, err := decode("table", magicTable, data)
	if err != nil {
		return err
	}
	*t = Table{S: sz[0], A: sz[1], D: sz[2], Data: vals}
	return nil
}

// Save writes t to the file path atomically: to a temporary file in the
// same directory, synced to disk, then renamed over path, so a crash leaves
// either the old file or the new one, never a mixture. The file has
// mode 0644.
func (t *Table) Save(path string) error {
	b, err := t.MarshalBinary()
	if err != nil {
		return err
	}
	if err := fileio.WriteAtomic(path, b, fileio.FileMode); err != nil {
		return fmt.Errorf("sf: save table: %w", err)
	}
	return nil
}

// LoadTable reads a Table saved by Save. A truncated, altered or foreign
// file, one larger than any record can be, or one holding a NaN or an
// infinity, gives an error wrapping ErrCorrupt; a file that cannot be read
// gives the os error.
func LoadTable(path string) (*Table, error) {
	b, err := fileio.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("sf: load table: %w", err)
	}
	t := new(Table)
	if err := t.UnmarshalBinary(b); err != nil {
		return nil, err
	}
	return t, nil
}

// MarshalBinary encodes l in the format of the package doc ("Files").
// It returns an error wrapping ErrDimension if len(l.W) does not match the
// sizes, or ErrNonFinite if a weight is NaN or infinite.
func (l *Linear) MarshalBinary() ([]byte, error) {
	if l.A <= 0 || l.D <= 0 || l.M <= 0 || len(l.W) != l.A*l.D*l.M {
		return nil, fmt.Errorf("sf: save linear: sizes %d, %d, %d and %d values: %w", l.A, l.D, l.M, len(l.W), ErrDimension)
	}
	return encode("linear", magicLinear, [3]int{l.A, l.D, l.M}, l.W)
}

// UnmarshalBinary sets l from data written by MarshalBinary. On error
// (wrapping ErrCorrupt, as for Table.UnmarshalBinary) l is unchanged.
func (l *Linear) UnmarshalBinary(data []byte) error {
	sz, vals, err := decode("linear", magicLinear, data)
	if err != nil {
		return err
	}
	*l = Linear{A: sz[0], D: sz[1], M: sz[2], W: vals}
	return nil
}

// Save writes l to the file path atomically, as Table.Save does.
func (l *Linear) Save(path string) error {
	b, err := l.MarshalBinary()
	if err != nil {
		return err
	}
	if err := fileio.WriteAtomic(path, b, fileio.FileMode); err != nil {
		return fmt.Errorf("sf: save linear: %w", err)
	}
	return nil
}

// LoadLinear reads a Linear saved by Save; errors as for LoadTable.
func LoadLinear(path string) (*Linear, error) {
	b, err := fileio.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("sf: load linear: %w", err)
	}
	l := new(Linear)
	if err := l.UnmarshalBinary(b); err != nil {
		return nil, err
	}
	return l, nil
}
