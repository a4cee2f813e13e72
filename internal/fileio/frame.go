package fileio

import (
	"encoding/binary"
	"fmt"
	"hash/crc32"
	"io"
	"math"
	"math/bits"
	"os"

	"github.com/successor-go/successor/internal/errs"
)

// Sizes and limits of the framing (see the package documentation).
const (
	// MagicLen is the length of a magic tag in bytes.
	MagicLen = 4
	// HeaderLen is the length of the header: magic, version, payload
	// length.
	HeaderLen = MagicLen + 4 + 8
	// TrailerLen is the length of the trailer: the CRC-32C.
	TrailerLen = 4
	// MaxPayload is the largest payload, in bytes, that an Encoder writes
	// and that Open and ReadFile accept (16 GiB). It bounds what a reader
	// can be made to allocate by any header, together with the length of
	// the data actually there.
	MaxPayload = 1 << 34
)

// FileMode is the permission of every file the library saves (before the
// umask is bypassed: WriteAtomic sets exactly these bits): readable by
// everyone, writable by the owner.
const FileMode os.FileMode = 0o644

var castagnoli = crc32.MakeTable(crc32.Castagnoli)

// Checksum returns the CRC-32C (Castagnoli polynomial) of b, the checksum
// of the framing.
func Checksum(b []byte) uint32 { return crc32.Checksum(b, castagnoli) }

func checkMagic(magic string) {
	if len(magic) != MagicLen {
		panic(fmt.Sprintf("fileio: magic %q is not %d bytes", magic, MagicLen))
	}
}

// An Encoder builds one framed record: header, payload, checksum. The
// payload is written with the append methods, integers and float64 bits
// little-endian; Seal completes the record. The zero value is not usable;
// use NewEncoder.
type Encoder struct {
	b       []byte
	magic   string
	version uint32
}

// NewEncoder returns an Encoder of a record of the given kind (magic, 4
// ASCII bytes) and format version. size is the expected payload length in
// bytes: the buffer is allocated once at HeaderLen + size + TrailerLen, so
// a record whose size is known up front costs one allocation (a wrong
// guess only costs reallocations). NewEncoder panics if len(magic) is not
// MagicLen.
func NewEncoder(magic string, version uint32, size int) *Encoder {
	checkMagic(magic)
	return &Encoder{b: make([]byte, HeaderLen, HeaderLen+max(size, 0)+TrailerLen), magic: magic, version: version}
}

// Len returns the number of payload bytes written so far.
func (e *Encoder) Len() int { return len(e.b) - HeaderLen }

// Uint8 appends v.
func (e *Encoder) Uint8(v uint8) { e.b = append(e.b, v) }

// Bool appends v as one byte, 1 for true and 0 for false.
func (e *Encoder) Bool(v bool) {
	if v {
		e.b = append(e.b, 1)
	} else {
		e.b = append(e.b, 0)
	}
}

// Uint32 appends v in 4 bytes.
func (e *Encoder) Uint32(v uint32) { e.b = binary.LittleEndian.AppendUint32(e.b, v) }

// Uint64 appends v in 8 bytes.
func (e *Encoder) Uint64(v uint64) { e.b = binary.LittleEndian.AppendUint64(e.b, v) }

// Int appends v as a two's complement int64 in 8 bytes.
func (e *Encoder) Int(v int) { e.Uint64(uint64(int64(v))) }

// Float64 appends the IEEE-754 bits of v in 8 bytes, so NaN payloads and
// signed zeros round-trip.
func (e *Encoder) Float64(v float64) { e.Uint64(math.Float64bits(v)) }

// Float64s appends every element of v as Float64 does, without a length.
func (e *Encoder) Float64s(v []float64) {
	for _, x := range v {
		e.b = binary.LittleEndian.AppendUint64(e.b, math.Float64bits(x))
	}
}

// Ints appends every element of v as Int does, without a length.
func (e *Encoder) Ints(v []int) {
	for _, x := range v {
		e.b = binary.LittleEndian.AppendUint64(e.b, uint64(int64(x)))
	}
}

// Bools appends every element of v as Bool does, without a length.
func (e *Encoder) Bools(v []bool) {
	for _, x := range v {
		e.Bool(x)
	}
}

// Bytes appends v as it is, without a length.
func (e *Encoder) Bytes(v []byte) { e.b = append(e.b, v...) }

// Seal writes the header in front of the payload and appends the checksum,
// and returns the record. The Encoder must not be used afterwards. Seal
// returns an error wrapping errs.Dimension if the payload is longer than
// MaxPayload.
func (e *Encoder) Seal() ([]byte, error) {
	n := uint64(e.Len())
	if n > MaxPayload {
		return nil, fmt.Errorf("fileio: payload of %d bytes exceeds %d: %w", n, uint64(MaxPayload), errs.Dimension)
	}
	b := e.b
	copy(b, e.magic)
	binary.LittleEndian.PutUint32(b[MagicLen:], e.version)
	binary.LittleEndian.PutUint64(b[MagicLen+4:], n)
	b = binary.LittleEndian.AppendUint32(b, Checksum(b))
	e.b = nil
	return b, nil
}

// A Decoder reads the payload of a record opened by Open. Every read
// checks the bytes left first and names its field in the error; the first
// error is kept, after which reads return zero values and nil slices and
// allocate nothing, so a caller may read a run of fields and check Err
// once. No read allocates more than the bytes left in the payload can
// hold.
type Decoder struct {
	b    []byte // payload not yet read
	what string // prefix of error messages, e.g. "sf: load table"
	err  error
}

// Open checks the framing of data and returns a Decoder of its payload.
// what prefixes every error message (for example "sf: load table"); magic
// and version are the kind and the format version the caller reads. Open
// returns an error wrapping errs.Corrupt if data is shorter than a header
// and trailer, has another magic or version, declares a payload length
// other than the bytes present (or above MaxPayload), or fails its
// checksum. It panics if len(magic) is not MagicLen.
//
// The Decoder's slices of raw bytes (Bytes) alias data.
func Open(what string, data []byte, magic string, version uint32) (*Decoder, error) {
	checkMagic(magic)
	d := &Decoder{what: what}
	if len(data) < HeaderLen+TrailerLen {
		return nil, d.fail("%d bytes, shorter than a header and checksum (%d)", len(data), HeaderLen+TrailerLen)
	}
	if string(data[:MagicLen]) != magic {
		return nil, d.fail("magic %q, want %q", data[:MagicLen], magic)
	}
	if v := binary.LittleEndian.Uint32(data[MagicLen:]); v != version {
		return nil, d.fail("format version %d, this code reads %d", v, version)
	}
	n := binary.LittleEndian.Uint64(data[MagicLen+4:])
	if have := uint64(len(data) - HeaderLen - TrailerLen); n != have || n > MaxPayload {
		return nil, d.fail("payload length %d, file holds %d", n, have)
	}
	end := len(data) - TrailerLen
	if got, want := binary.LittleEndian.Uint32(data[end:]), Checksum(data[:end]); got != want {
		return nil, d.fail("checksum %08x, content gives %08x", got, want)
	}
	d.b = data[HeaderLen:end]
	return d, nil
}

func (d *Decoder) fail(format string, args ...any) error {
	if d.err == nil {
		d.err = fmt.Errorf("%s: %s: %w", d.what, fmt.Sprintf(format, args...), errs.Corrupt)
	}
	return d.err
}

// Fail records, unless an error is already recorded, that field holds an
// unacceptable value, described by format and args, and returns the
// recorded error (wrapping errs.Corrupt). Callers use it for range checks
// of their own.
func (d *Decoder) Fail(field, format string, args ...any) error {
	return d.fail("%s: %s", field, fmt.Sprintf(format, args...))
}

// Err returns the first error met, or nil.
func (d *Decoder) Err() error { return d.err }

// Finish returns the first error met or, if there was none, an error if
// payload bytes are left unread.
func (d *Decoder) Finish() error {
	if d.err == nil && len(d.b) != 0 {
		d.fail("%d trailing bytes", len(d.b))
	}
	return d.err
}

// Remaining returns the number of payload bytes not yet read.
func (d *Decoder) Remaining() int { return len(d.b) }

// take returns the next n bytes, or nil after recording an error if fewer
// are left.
func (d *Decoder) take(field string, n int) []byte {
	if d.err != nil {
		return nil
	}
	if n < 0 || n > len(d.b) {
		d.fail("%s: %d bytes left, need %d", field, len(d.b), n)
		return nil
	}
	v := d.b[:n:n]
	d.b = d.b[n:]
	return v
}

// Uint8 reads one byte.
func (d *Decoder) Uint8(field string) uint8 {
	if v := d.take(field, 1); v != nil {
		return v[0]
	}
	return 0
}

// Bool reads one byte, which must be 0 or 1.
func (d *Decoder) Bool(field string) bool {
	v := d.Uint8(field)
	if v > 1 {
		d.Fail(field, "byte %d is not 0 or 1", v)
	}
	return v == 1
}

// Uint32 reads 4 bytes.
func (d *Decoder) Uint32(field string) uint32 {
	if v := d.take(field, 4); v != nil {
		return binary.LittleEndian.Uint32(v)
	}
	return 0
}

// Uint64 reads 8 bytes.
func (d *Decoder) Uint64(field string) uint64 {
	if v := d.take(field, 8); v != nil {
		return binary.LittleEndian.Uint64(v)
	}
	return 0
}

// Int reads a two's complement int64; a value that does not fit an int is
// an error.
func (d *Decoder) Int(field string) int {
	v := int64(d.Uint64(field))
	if v < math.MinInt || v > math.MaxInt {
		d.Fail(field, "%d does not fit an int", v)
		return 0
	}
	return int(v)
}

// Size reads an Int that must lie in [lo, hi]; outside it, it records an
// error and returns lo.
func (d *Decoder) Size(field string, lo, hi int) int {
	v := d.Int(field)
	if d.err != nil {
		return lo
	}
	if v < lo || v > hi {
		d.Fail(field, "%d not in [%d, %d]", v, lo, hi)
		return lo
	}
	return v
}

// Float64 reads 8 bytes as the IEEE-754 bits of a float64.
func (d *Decoder) Float64(field string) float64 { return math.Float64frombits(d.Uint64(field)) }

// Count returns the product of dims, checking that no factor is negative,
// that the product does not overflow, and that product x elem bytes are
// left in the payload (elem is taken as at least 1, so the product never
// exceeds the bytes left). On failure it records an error and returns 0. A
// caller uses it to validate sizes read from the payload before it
// allocates anything of their product.
func (d *Decoder) Count(field string, elem int, dims ...int) int {
	if d.err != nil {
		return 0
	}
	p := uint64(1)
	for _, n := range dims {
		if n < 0 {
			d.Fail(field, "negative size %d", n)
			return 0
		}
		hi, lo := bits.Mul64(p, uint64(n))
		if hi != 0 {
			d.Fail(field, "sizes %v overflow", dims)
			return 0
		}
		p = lo
	}
	if hi, bytes := bits.Mul64(p, uint64(max(elem, 1))); hi != 0 || bytes > uint64(len(d.b)) {
		if len(dims) == 1 {
			d.Fail(field, "%d elements of %d bytes, %d bytes left", p, elem, len(d.b))
		} else {
			d.Fail(field, "sizes %v: %d elements of %d bytes, %d bytes left", dims, p, elem, len(d.b))
		}
		return 0
	}
	return int(p)
}

// Len reads an Int that counts elements of elem bytes each that follow,
// and checks that it is not negative and that so many elements fit in the
// bytes left. On failure it records an error and returns 0.
func (d *Decoder) Len(field string, elem int) int {
	n := d.Int(field)
	if d.err != nil {
		return 0
	}
	return d.Count(field, elem, n)
}

// Float64s reads n float64s into a new slice, after checking that 8n bytes
// are left.
func (d *Decoder) Float64s(field string, n int) []float64 {
	if d.Count(field, 8, n) != n || d.err != nil {
		return nil
	}
	v := make([]float64, n)
	d.ReadFloat64s(field, v)
	return v
}

// ReadFloat64s fills dst with float64s read as Float64 does. It reads
// nothing and records an error if fewer than 8 len(dst) bytes are left.
func (d *Decoder) ReadFloat64s(field string, dst []float64) {
	raw := d.take(field, 8*len(dst))
	if raw == nil {
		return
	}
	for i := range dst {
		dst[i] = math.Float64frombits(binary.LittleEndian.Uint64(raw[8*i:]))
	}
}

// Ints reads n Ints into a new slice, after checking that 8n bytes are
// left.
func (d *Decoder) Ints(field string, n int) []int {
	if d.Count(field, 8, n) != n || d.err != nil {
		return nil
	}
	v := make([]int, n)
	d.ReadInts(field, v)
	if d.err != nil {
		return nil
	}
	return v
}

// ReadInts fills dst with Ints. It reads nothing and records an error if
// fewer than 8 len(dst) bytes are left; a value that does not fit an int
// is an error too.
func (d *Decoder) ReadInts(field string, dst []int) {
	raw := d.take(field, 8*len(dst))
	if raw == nil {
		return
	}
	for i := range dst {
		v := int64(binary.LittleEndian.Uint64(raw[8*i:]))
		if v < math.MinInt || v > math.MaxInt {
			d.Fail(field, "%d does not fit an int", v)
			return
		}
		dst[i] = int(v)
	}
}

// Bools reads n Bools into a new slice, after checking that n bytes are
// left.
func (d *Decoder) Bools(field string, n int) []bool {
	if d.Count(field, 1, n) != n || d.err != nil {
		return nil
	}
	v := make([]bool, n)
	d.ReadBools(field, v)
	if d.err != nil {
		return nil
	}
	return v
}

// ReadBools fills dst with Bools (bytes 0 or 1). It reads nothing and
// records an error if fewer than len(dst) bytes are left.
func (d *Decoder) ReadBools(field string, dst []bool) {
	raw := d.take(field, len(dst))
	if raw == nil {
		return
	}
	for i, c := range raw {
		if c > 1 {
			d.Fail(field, "byte %d is not 0 or 1", c)
			return
		}
		dst[i] = c == 1
	}
}

// Bytes returns the next n bytes. The slice aliases the data given to
// Open (with its capacity cut to n); copy it to keep it.
func (d *Decoder) Bytes(field string, n int) []byte { return d.take(field, n) }

// ReadFile reads the file at path for a loader. A file larger than a
// record can be (HeaderLen + MaxPayload + TrailerLen bytes) is refused
// with an error wrapping errs.Corrupt, before it is read if it is a
// regular file; other errors are the *os.PathError of the failing call.
func ReadFile(path string) ([]byte, error) {
	const limit = HeaderLen + MaxPayload + TrailerLen
	tooLarge := func() error {
		return fmt.Errorf("fileio: read %s: more than %d bytes, the most a record can hold: %w", path, int64(limit), errs.Corrupt)
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	fi, err := f.Stat()
	if err != nil {
		return nil, err
	}
	size := fi.Size()
	if size > limit || size >= math.MaxInt {
		return nil, tooLarge()
	}
	// The size of a regular file is a good first guess; anything else
	// (a pipe, a device) is read until the limit.
	buf := make([]byte, 0, int(max(size, 0))+1)
	r := io.LimitReader(f, limit+1)
	for {
		if len(buf) == cap(buf) {
			buf = append(buf, 0)[:len(buf)]
		}
		n, err := r.Read(buf[len(buf):cap(buf)])
		buf = buf[:len(buf)+n]
		if int64(len(buf)) > limit {
			return nil, tooLarge()
		}
		if err == io.EOF {
			return buf, nil
		}
		if err != nil {
			return nil, err // an *os.PathError naming path
		}
	}
}

// Reseal returns a copy of data with the payload length field and the
// checksum recomputed for the bytes present, or data itself if it is
// shorter than a header and trailer. Tests and fuzz targets use it so that
// altered records reach the field checks rather than failing the
// checksum.
func Reseal(data []byte) []byte {
	if len(data) < HeaderLen+TrailerLen {
		return data
	}
	b := append([]byte(nil), data[:len(data)-TrailerLen]...)
	binary.LittleEndian.PutUint64(b[MagicLen+4:], uint64(len(b)-HeaderLen))
	return binary.LittleEndian.AppendUint32(b, Checksum(b))
}
