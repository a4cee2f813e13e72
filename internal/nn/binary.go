package nn

import (
	"encoding/binary"
	"fmt"
	"hash/crc32"
	"math"
)

const (
	mlpMagic   = "NNML"
	adamMagic  = "NNAD"
	binVersion = 1
	// maxParams bounds the parameter count a loader accepts (2^26 values,
	// 512 MiB), so a corrupt size cannot ask for an absurd allocation.
	maxParams = 1 << 26
)

// AppendFloats appends the IEEE-754 bits of v, little-endian, to b.
func appendFloats(b []byte, v []float64) []byte {
	for _, x := range v {
		b = binary.LittleEndian.AppendUint64(b, math.Float64bits(x))
	}
	return b
}

// sealed appends the CRC-32 of b to b.
func sealed(b []byte) []byte {
	return binary.LittleEndian.AppendUint32(b, crc32.ChecksumIEEE(b))
}

// reader decodes little-endian fields, remembering the first failure.
type reader struct {
	b   []byte
	bad bool
}

func (r *reader) take(n int) []byte {
	if r.bad || n < 0 || n > len(r.b) {
		r.bad = true
		return nil
	}
	v := r.b[:n]
	r.b = r.b[n:]
	return v
}

func (r *reader) u8() uint8 {
	v := r.take(1)
	if v == nil {
		return 0
	}
	return v[0]
}

func (r *reader) u32() uint32 {
	v := r.take(4)
	if v == nil {
		return 0
	}
	return binary.LittleEndian.Uint32(v)
}

func (r *reader) u64() uint64 {
	v := r.take(8)
	if v == nil {
		return 0
	}
	return binary.LittleEndian.Uint64(v)
}

func (r *reader) f64() float64 { return math.Float64frombits(r.u64()) }

func (r *reader) floats(dst []float64) {
	v := r.take(8 * len(dst))
	if v == nil {
		return
	}
	for i := range dst {
		dst[i] = math.Float64frombits(binary.LittleEndian.Uint64(v[8*i:]))
	}
}

// open checks the magic, version and checksum of b and returns a reader
// over the payload between the version and the checksum.
func open(b []byte, magic, what string) (*reader, error) {
	if len(b) < len(magic)+8 {
		return nil, fmt.Errorf("nn: load %s: %d bytes: %w", what, len(b), ErrCorrupt)
	}
	if string(b[:len(magic)]) != magic {
		return nil, fmt.Errorf("nn: load %s: bad magic %q: %w", what, b[:len(magic)], ErrCorrupt)
	}
	body, sum := b[:len(b)-4], binary.LittleEndian.Uint32(b[len(b)-4:])
	if crc32.ChecksumIEEE(body) != sum {
		return nil, fmt.Errorf("nn: load %s: checksum mismatch: %w", what, ErrCorrupt)
	}
	r := &reader{b: body[len(magic):]}
	if v := r.u32(); v != binVersion {
		return nil, fmt.Errorf("nn: load %s: version %d, want %d: %w", what, v, binVersion, ErrCorrupt)
	}
	return r, nil
}

// MarshalBinary encodes the shape and parameters of m exactly (format in
// the package doc). Gradients and activations are not saved.
func (m *MLP) MarshalBinary() ([]byte, error) {
	L := len(m.acts)
	b := make([]byte, 0, 4+4+4+4+4*(L+1)+L+8+8*len(m.params)+4)
	b = append(b, mlpMagic...)
	b = binary.LittleEndian.AppendUint32(b, binVersion)
	b = binary.LittleEndian.AppendUint32(b, uint32(m.maxBatch))
	b = binary.LittleEndian.AppendUint32(b, uint32(L))
	for _, s := range m.sizes {
		b = binary.LittleEndian.AppendUint32(b, uint32(s))
	}
	for _, a := range m.acts {
		b = append(b, byte(a))
	}
	b = binary.LittleEndian.AppendUint64(b, uint64(len(m.params)))
	b = appendFloats(b, m.params)
	return sealed(b), nil
}

// UnmarshalBinary replaces m with the network encoded in data by
// MarshalBinary, shape included. It returns an error wrapping ErrCorrupt
// if data is malformed, in which case m is unchanged.
func (m *MLP) UnmarshalBinary(data []byte) error {
	r, err := open(data, mlpMagic, "mlp")
	if err != nil {
		return err
	}
	maxBatch := r.u32()
	L := r.u32()
	if r.bad || L < 1 || L > MaxLayers {
		return fmt.Errorf("nn: load mlp: %d layers: %w", L, ErrCorrupt)
	}
	sizes := make([]int, L+1)
	for i := range sizes {
		sizes[i] = int(r.u32())
	}
	acts := make([]Activation, L)
	for i := range acts {
		acts[i] = Activation(r.u8())
	}
	np := r.u64()
	if r.bad {
		return fmt.Errorf("nn: load mlp: short header: %w", ErrCorrupt)
	}
	var want uint64
	for l := range acts {
		want += uint64(sizes[l])*uint64(sizes[l+1]) + uint64(sizes[l+1])
		if want > maxParams {
			return fmt.Errorf("nn: load mlp: more than %d parameters: %w", maxParams, ErrCorrupt)
		}
	}
	if np != want || uint64(len(r.b)) != 8*np {
		return fmt.Errorf("nn: load mlp: %d parameters and %d bytes for shape %v: %w", np, len(r.b), sizes, ErrCorrupt)
	}
	n, err := build(sizes, acts, int(maxBatch))
	if err != nil {
		return fmt.Errorf("nn: load mlp: %v: %w", err, ErrCorrupt)
	}
	r.floats(n.params)
	*m = *n
	return nil
}

// MarshalBinary encodes the hyperparameters, step count and moments of o
// exactly (format in the package doc).
func (o *Adam) MarshalBinary() ([]byte, error) {
	b := make([]byte, 0, 4+4+8+4*8+8+16*len(o.M)+4)
	b = append(b, adamMagic...)
	b = binary.LittleEndian.AppendUint32(b, binVersion)
	b = binary.LittleEndian.AppendUint64(b, uint64(len(o.M)))
	b = appendFloats(b, []float64{o.LR, o.Beta1, o.Beta2, o.Eps})
	b = binary.LittleEndian.AppendUint64(b, uint64(o.T))
	b = appendFloats(b, o.M)
	b = appendFloats(b, o.V)
	return sealed(b), nil
}

// UnmarshalBinary replaces o with the optimiser encoded in data by
// MarshalBinary. It returns an error wrapping ErrCorrupt if data is
// malformed, in which case o is unchanged.
func (o *Adam) UnmarshalBinary(data []byte) error {
	r, err := open(data, adamMagic, "adam")
	if err != nil {
		return err
	}
	n := r.u64()
	lr, b1, b2, eps := r.f64(), r.f64(), r.f64(), r.f64()
	t := r.u64()
	if r.bad || n > maxParams || uint64(len(r.b)) != 16*n {
		return fmt.Errorf("nn: load adam: %d parameters in %d bytes: %w", n, len(r.b), ErrCorrupt)
	}
	if t > math.MaxInt32 {
		return fmt.Errorf("nn: load adam: step %d: %w", t, ErrCorrupt)
	}
	for _, v := range []float64{lr, b1, b2, eps} {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("nn: load adam: non-finite hyperparameter: %w", ErrCorrupt)
		}
	}
	a := &Adam{LR: lr, Beta1: b1, Beta2: b2, Eps: eps, T: int(t), M: make([]float64, n), V: make([]float64, n)}
	r.floats(a.M)
	r.floats(a.V)
	*o = *a
	return nil
}
