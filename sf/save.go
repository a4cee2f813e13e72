package sf

import (
	"encoding/binary"
	"fmt"
	"hash/crc32"
	"math"
	"math/bits"
	"os"

	"github.com/successor-go/successor/internal/fileio"
)

// The file format is documented in the package doc (doc.go, "Files").
const (
	formatVersion = 1
	headerLen     = 8 + 4 + 3*8
	maxValues     = 1 << 40 // sanity bound on the number of values
)

var (
	magicTable  = [8]byte{'S', 'F', 'T', 'A', 'B', 'L', 'E', 0}
	magicLinear = [8]byte{'S', 'F', 'L', 'I', 'N', 'E', 'A', 'R'}
)

func encode(magic [8]byte, sizes [3]int, vals []float64) []byte {
	buf := make([]byte, headerLen+8*len(vals)+4)
	copy(buf, magic[:])
	binary.LittleEndian.PutUint32(buf[8:], formatVersion)
	for i, n := range sizes {
		binary.LittleEndian.PutUint64(buf[12+8*i:], uint64(n))
	}
	p := buf[headerLen:]
	for i, v := range vals {
		binary.LittleEndian.PutUint64(p[8*i:], math.Float64bits(v))
	}
	n := len(buf) - 4
	binary.LittleEndian.PutUint32(buf[n:], crc32.ChecksumIEEE(buf[:n]))
	return buf
}

func decode(what string, magic [8]byte, data []byte) (sizes [3]int, vals []float64, err error) {
	if len(data) < headerLen+4 {
		return sizes, nil, fmt.Errorf("sf: load %s: %d bytes, shorter than a header: %w", what, len(data), ErrCorrupt)
	}
	if [8]byte(data[:8]) != magic {
		return sizes, nil, fmt.Errorf("sf: load %s: bad magic %q: %w", what, data[:8], ErrCorrupt)
	}
	if v := binary.LittleEndian.Uint32(data[8:]); v != formatVersion {
		return sizes, nil, fmt.Errorf("sf: load %s: unsupported version %d: %w", what, v, ErrCorrupt)
	}
	total := uint64(1)
	for i := range sizes {
		n := binary.LittleEndian.Uint64(data[12+8*i:])
		hi, lo := bits.Mul64(total, n)
		if n == 0 || hi != 0 || lo > maxValues {
			return sizes, nil, fmt.Errorf("sf: load %s: bad sizes: %w", what, ErrCorrupt)
		}
		total = lo
		sizes[i] = int(n)
	}
	if uint64(len(data)) != headerLen+8*total+4 {
		return sizes, nil, fmt.Errorf("sf: load %s: %d bytes, want %d: %w", what, len(data), headerLen+8*total+4, ErrCorrupt)
	}
	n := len(data) - 4
	if crc32.ChecksumIEEE(data[:n]) != binary.LittleEndian.Uint32(data[n:]) {
		return sizes, nil, fmt.Errorf("sf: load %s: checksum mismatch: %w", what, ErrCorrupt)
	}
	vals = make([]float64, total)
	p := data[headerLen:n]
	for i := range vals {
		vals[i] = math.Float64frombits(binary.LittleEndian.Uint64(p[8*i:]))
	}
	return sizes, vals, nil
}

// MarshalBinary encodes t in the format of the package doc ("Files")
// (magic, version, sizes, values, CRC-32). It returns an error wrapping
// ErrDimension if len(t.Data) does not match the sizes.
func (t *Table) MarshalBinary() ([]byte, error) {
	if t.S <= 0 || t.A <= 0 || t.D <= 0 || len(t.Data) != t.S*t.A*t.D {
		return nil, fmt.Errorf("sf: save table: sizes %d, %d, %d and %d values: %w", t.S, t.A, t.D, len(t.Data), ErrDimension)
	}
	return encode(magicTable, [3]int{t.S, t.A, t.D}, t.Data), nil
}

// UnmarshalBinary sets t from data written by MarshalBinary. On error
// (wrapping ErrCorrupt) t is unchanged.
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
// mode 0600.
func (t *Table) Save(path string) error {
	b, err := t.MarshalBinary()
	if err != nil {
		return err
	}
	if err := fileio.WriteAtomic(path, b, 0o600); err != nil {
		return fmt.Errorf("sf: save table: %w", err)
	}
	return nil
}

// LoadTable reads a Table saved by Save. A truncated, altered or foreign
// file gives an error wrapping ErrCorrupt; a file that cannot be read gives
// the os error.
func LoadTable(path string) (*Table, error) {
	b, err := os.ReadFile(path)
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
// sizes.
func (l *Linear) MarshalBinary() ([]byte, error) {
	if l.A <= 0 || l.D <= 0 || l.M <= 0 || len(l.W) != l.A*l.D*l.M {
		return nil, fmt.Errorf("sf: save linear: sizes %d, %d, %d and %d values: %w", l.A, l.D, l.M, len(l.W), ErrDimension)
	}
	return encode(magicLinear, [3]int{l.A, l.D, l.M}, l.W), nil
}

// UnmarshalBinary sets l from data written by MarshalBinary. On error
// (wrapping ErrCorrupt) l is unchanged.
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
	if err := fileio.WriteAtomic(path, b, 0o600); err != nil {
		return fmt.Errorf("sf: save linear: %w", err)
	}
	return nil
}

// LoadLinear reads a Linear saved by Save; errors as for LoadTable.
func LoadLinear(path string) (*Linear, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("sf: load linear: %w", err)
	}
	l := new(Linear)
	if err := l.UnmarshalBinary(b); err != nil {
		return nil, err
	}
	return l, nil
}
