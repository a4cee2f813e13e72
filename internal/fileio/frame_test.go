package fileio

import (
	"bytes"
	"encoding/binary"
	"errors"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"testing"

	"github.com/successor-go/successor/internal/errs"
)

// TestChecksum checks the CRC-32C against published values: the check
// value of "123456789" for CRC-32/ISCSI (0xE3069283, CRC RevEng catalogue)
// and the examples of RFC 3720 (iSCSI), Appendix B.4: 32 bytes of zeros,
// 32 bytes of ones, and the bytes 0x00..0x1f (the RFC lists each CRC as its
// little-endian bytes, e.g. aa 36 91 8a).
func TestChecksum(t *testing.T) {
	t.Parallel()
	ones := bytes.Repeat([]byte{0xff}, 32)
	inc := make([]byte, 32)
	for i := range inc {
		inc[i] = byte(i)
	}
	for _, tc := range []struct {
		name string
		b    []byte
		want uint32
	}{
		{"123456789", []byte("123456789"), 0xe3069283},
		{"32 zeros", make([]byte, 32), 0x8a9136aa},
		{"32 ones", ones, 0x62a8ab43},
		{"incrementing", inc, 0x46dd794e},
	} {
		if got := Checksum(tc.b); got != tc.want {
			t.Errorf("%s: %08x, want %08x", tc.name, got, tc.want)
		}
	}
}

// record is a sample with every kind of field.
type record struct {
	u8    uint8
	flag  bool
	u32   uint32
	u64   uint64
	i     int
	f     float64
	vals  []float64
	ints  []int
	flags []bool
	blob  []byte
}

var sample = record{
	u8: 0xa5, flag: true, u32: 0xdeadbeef, u64: 1<<63 + 5, i: -42,
	f:     math.Float64frombits(0x7ff8000000000123), // a NaN with a payload
	vals:  []float64{0, math.Copysign(0, -1), math.Inf(-1), math.SmallestNonzeroFloat64, -1.5},
	ints:  []int{math.MinInt, -1, 0, math.MaxInt},
	flags: []bool{true, false, true},
	blob:  []byte("nested"),
}

const (
	testMagic   = "TEST"
	testVersion = 7
)

func (r *record) size() int {
	return 1 + 1 + 4 + 8 + 8 + 8 + 8 + 8*len(r.vals) + 8 + 8*len(r.ints) + 8 + len(r.flags) + 8 + len(r.blob)
}

func (r *record) encode() []byte {
	e := NewEncoder(testMagic, testVersion, r.size())
	e.Uint8(r.u8)
	e.Bool(r.flag)
	e.Uint32(r.u32)
	e.Uint64(r.u64)
	e.Int(r.i)
	e.Float64(r.f)
	e.Int(len(r.vals))
	e.Float64s(r.vals)
	e.Int(len(r.ints))
	e.Ints(r.ints)
	e.Int(len(r.flags))
	e.Bools(r.flags)
	e.Int(len(r.blob))
	e.Bytes(r.blob)
	b, err := e.Seal()
	if err != nil {
		panic(err)
	}
	return b
}

func decode(data []byte) (*record, error) {
	d, err := Open("test: load", data, testMagic, testVersion)
	if err != nil {
		return nil, err
	}
	var r record
	r.u8 = d.Uint8("u8")
	r.flag = d.Bool("flag")
	r.u32 = d.Uint32("u32")
	r.u64 = d.Uint64("u64")
	r.i = d.Int("i")
	r.f = d.Float64("f")
	r.vals = d.Float64s("vals", d.Len("vals", 8))
	r.ints = d.Ints("ints", d.Len("ints", 8))
	r.flags = d.Bools("flags", d.Len("flags", 1))
	r.blob = bytes.Clone(d.Bytes("blob", d.Len("blob", 1)))
	if err := d.Finish(); err != nil {
		return nil, err
	}
	return &r, nil
}

func sameBits(x, y []float64) bool {
	return slices.EqualFunc(x, y, func(a, b float64) bool { return math.Float64bits(a) == math.Float64bits(b) })
}

func (r *record) equal(s *record) bool {
	return r.u8 == s.u8 && r.flag == s.flag && r.u32 == s.u32 && r.u64 == s.u64 && r.i == s.i &&
		math.Float64bits(r.f) == math.Float64bits(s.f) && sameBits(r.vals, s.vals) &&
		slices.Equal(r.ints, s.ints) && slices.Equal(r.flags, s.flags) && bytes.Equal(r.blob, s.blob)
}

// TestFrameLayout checks the header and trailer byte by byte against the
// layout of the package documentation.
func TestFrameLayout(t *testing.T) {
	t.Parallel()
	b := sample.encode()
	n := sample.size()
	if len(b) != HeaderLen+n+TrailerLen || cap(b) != len(b) {
		t.Fatalf("record of %d bytes (capacity %d), want %d = %d + %d + %d, allocated once",
			len(b), cap(b), HeaderLen+n+TrailerLen, HeaderLen, n, TrailerLen)
	}
	if string(b[:4]) != testMagic {
		t.Errorf("magic %q", b[:4])
	}
	if v := binary.LittleEndian.Uint32(b[4:]); v != testVersion {
		t.Errorf("version %d", v)
	}
	if l := binary.LittleEndian.Uint64(b[8:]); l != uint64(n) {
		t.Errorf("payload length %d, want %d", l, n)
	}
	if c := binary.LittleEndian.Uint32(b[len(b)-4:]); c != Checksum(b[:len(b)-4]) {
		t.Errorf("trailer %08x is not the CRC-32C of the rest", c)
	}
	if b[HeaderLen] != sample.u8 || b[HeaderLen+1] != 1 {
		t.Errorf("payload starts % x", b[HeaderLen:HeaderLen+2])
	}
}

func TestFrameRoundTrip(t *testing.T) {
	t.Parallel()
	for _, r := range []record{sample, {}} {
		got, err := decode(r.encode())
		if err != nil {
			t.Fatal(err)
		}
		if !got.equal(&r) {
			t.Errorf("round trip: got %+v, want %+v", got, r)
		}
	}
}

// TestFrameCorrupt checks that every truncation, an extra byte, and every
// single-bit flip is rejected with errs.Corrupt: CRC-32C detects all
// single-bit errors, and a flip in the header fails the magic, version or
// length check first.
func TestFrameCorrupt(t *testing.T) {
	t.Parallel()
	b := sample.encode()
	for n := range len(b) {
		if _, err := decode(b[:n]); !errors.Is(err, errs.Corrupt) {
			t.Fatalf("truncated to %d bytes: %v, want errs.Corrupt", n, err)
		}
	}
	if _, err := decode(append(bytes.Clone(b), 0)); !errors.Is(err, errs.Corrupt) {
		t.Errorf("extra byte: %v", err)
	}
	for i := range b {
		for bit := range 8 {
			c := bytes.Clone(b)
			c[i] ^= 1 << bit
			if _, err := decode(c); !errors.Is(err, errs.Corrupt) {
				t.Fatalf("bit %d of byte %d flipped: %v, want errs.Corrupt", bit, i, err)
			}
		}
	}
}

// TestFrameErrors checks the error of each failure: the sentinel, the
// record's prefix and the field named.
func TestFrameErrors(t *testing.T) {
	t.Parallel()
	good := sample.encode()
	mut := func(f func(b []byte)) []byte {
		b := bytes.Clone(good)
		f(b)
		return b
	}
	valsLen := HeaderLen + 1 + 1 + 4 + 8 + 8 + 8 // offset of the count of vals
	for _, tc := range []struct {
		name string
		b    []byte
		want string
	}{
		{"empty", nil, "shorter than a header"},
		{"magic", mut(func(b []byte) { b[0] = 'X' }), `magic "XEST"`},
		{"version", mut(func(b []byte) { b[4] = 8 }), "format version 8"},
		{"length", mut(func(b []byte) { b[8]++ }), "payload length"},
		{"giant length", mut(func(b []byte) { binary.LittleEndian.PutUint64(b[8:], math.MaxUint64) }), "payload length"},
		{"checksum", mut(func(b []byte) { b[len(b)-1] ^= 1 }), "checksum"},
		{"giant count", Reseal(mut(func(b []byte) { binary.LittleEndian.PutUint64(b[valsLen:], 1<<31-1) })), "vals: 2147483647 elements of 8 bytes"},
		{"negative count", Reseal(mut(func(b []byte) { binary.LittleEndian.PutUint64(b[valsLen:], math.MaxUint64) })), "vals: negative size -1"},
		{"bad flag", Reseal(mut(func(b []byte) { b[HeaderLen+1] = 2 })), "flag: byte 2 is not 0 or 1"},
		{"trailing", Reseal(append(bytes.Clone(good[:len(good)-TrailerLen]), 1, 2, 3, 0, 0, 0, 0)), "3 trailing bytes"},
		{"short", Reseal(good[:len(good)-1]), "blob: 6 elements of 1 bytes, 5 bytes left"},
	} {
		_, err := decode(tc.b)
		if !errors.Is(err, errs.Corrupt) {
			t.Errorf("%s: %v, want errs.Corrupt", tc.name, err)
			continue
		}
		if msg := err.Error(); !strings.HasPrefix(msg, "test: load: ") || !strings.Contains(msg, tc.want) {
			t.Errorf("%s: message %q, want the prefix and %q", tc.name, msg, tc.want)
		}
	}
}

// TestFrameGiantHeaderAllocs checks that sizes claiming far more than the
// data holds are refused without allocating for them: a count of 2^31-1
// float64s (16 GiB) in a record of a few bytes, and dimensions whose
// product overflows.
func TestFrameGiantHeaderAllocs(t *testing.T) {
	e := NewEncoder(testMagic, testVersion, 8)
	e.Int(1<<31 - 1)
	b, _ := e.Seal()
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	for range 10 {
		d, err := Open("test", b, testMagic, testVersion)
		if err != nil {
			t.Fatal(err)
		}
		n := d.Int("n")
		if v := d.Float64s("vals", n); v != nil || !errors.Is(d.Err(), errs.Corrupt) {
			t.Fatalf("a count of %d in %d bytes was accepted", n, len(b))
		}
	}
	runtime.ReadMemStats(&after)
	// Each failed load allocates the Decoder and its error message, a few
	// hundred bytes; none is sized by the header.
	if got := after.TotalAlloc - before.TotalAlloc; got > 1<<16 {
		t.Errorf("10 refused loads allocated %d bytes, want well under 64 KiB", got)
	}
	d, _ := Open("test", b, testMagic, testVersion)
	big := d.Int("big")
	if n := d.Count("product", 8, big, big, big); n != 0 || !strings.Contains(d.Err().Error(), "overflow") {
		t.Errorf("Count of %d^3 gave %d, %v; want an overflow error", big, n, d.Err())
	}
}

// TestEncoderAllocs checks that encoding a record of known size allocates
// its buffer once.
func TestEncoderAllocs(t *testing.T) {
	vals := make([]float64, 1000)
	allocs := testing.AllocsPerRun(20, func() {
		e := NewEncoder(testMagic, 1, 8+8*len(vals))
		e.Int(len(vals))
		e.Float64s(vals)
		if _, err := e.Seal(); err != nil {
			t.Fatal(err)
		}
	})
	if allocs > 2 { // the buffer, and the Encoder if it escapes
		t.Errorf("%v allocations, want the buffer only", allocs)
	}
}

func TestNewEncoderBadMagic(t *testing.T) {
	t.Parallel()
	for _, m := range []string{"", "ABC", "ABCDE"} {
		func() {
			defer func() {
				if r := recover(); r == nil {
					t.Errorf("NewEncoder(%q) did not panic", m)
				}
			}()
			NewEncoder(m, 1, 0)
		}()
	}
}

func TestReadFile(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	path := filepath.Join(dir, "rec")
	b := sample.encode()
	if err := WriteAtomic(path, b, FileMode); err != nil {
		t.Fatal(err)
	}
	got, err := ReadFile(path)
	if err != nil || !bytes.Equal(got, b) {
		t.Fatalf("ReadFile: %d bytes, %v; want the %d bytes written", len(got), err, len(b))
	}
	if _, err := ReadFile(filepath.Join(dir, "missing")); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("missing file: %v", err)
	}
	// A sparse file one byte larger than any record: refused from its
	// size, before anything is read.
	huge := filepath.Join(dir, "huge")
	f, err := os.Create(huge)
	if err != nil {
		t.Fatal(err)
	}
	if err := f.Truncate(HeaderLen + MaxPayload + TrailerLen + 1); err != nil {
		f.Close()
		t.Skipf("cannot make a sparse file: %v", err)
	}
	f.Close()
	if _, err := ReadFile(huge); !errors.Is(err, errs.Corrupt) {
		t.Errorf("file above the cap: %v, want errs.Corrupt", err)
	}
}

// FuzzOpen checks that decoding arbitrary bytes never panics, that every
// error wraps errs.Corrupt, and that accepted bytes re-encode to
// themselves. Each input is also tried with its length and checksum
// recomputed, so that mutations reach the field checks.
func FuzzOpen(f *testing.F) {
	good := sample.encode()
	f.Add(good)
	f.Add((&record{}).encode())
	f.Add(good[:HeaderLen])
	giant := bytes.Clone(good)
	binary.LittleEndian.PutUint64(giant[HeaderLen+30:], 1<<31-1) // the count of vals
	f.Add(Reseal(giant))
	f.Fuzz(func(t *testing.T, data []byte) {
		check := func(data []byte) {
			r, err := decode(data)
			if err != nil {
				if !errors.Is(err, errs.Corrupt) {
					t.Fatalf("error %v does not wrap errs.Corrupt", err)
				}
				return
			}
			if out := r.encode(); !bytes.Equal(out, data) {
				t.Fatal("accepted bytes do not re-encode to themselves")
			}
		}
		check(data)
		check(Reseal(data))
	})
}
