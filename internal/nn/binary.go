package nn

import (
	"fmt"
	"math"

	"github.com/successor-go/successor/internal/fileio"
)

// Record kinds and format versions (framing in package internal/fileio,
// payloads in the package doc). Version 1 was this package's own framing.
const (
	mlpMagic   = "NNML"
	adamMagic  = "NNAD"
	binVersion = 2
	// maxParams bounds the parameter count a loader accepts (2^26 values,
	// 512 MiB), so a corrupt size cannot ask for an absurd allocation.
	maxParams = 1 << 26
)

// MarshalBinary encodes the shape and parameters of m exactly (format in
// the package doc). Gradients and activations are not saved.
func (m *MLP) MarshalBinary() ([]byte, error) {
	L := len(m.acts)
	e := fileio.NewEncoder(mlpMagic, binVersion, 8+8+8*(L+1)+L+8*len(m.params))
	e.Int(m.maxBatch)
	e.Int(L)
	e.Ints(m.sizes)
	for _, a := range m.acts {
		e.Uint8(uint8(a))
	}
	e.Float64s(m.params)
	b, err := e.Seal()
	if err != nil {
		return nil, fmt.Errorf("nn: save mlp: %w", err)
	}
	return b, nil
}

// UnmarshalBinary replaces m with the network encoded in data by
// MarshalBinary, shape included. It returns an error wrapping ErrCorrupt
// if data is malformed (a NaN or infinite parameter included), in which
// case m is unchanged.
func (m *MLP) UnmarshalBinary(data []byte) error {
	d, err := fileio.Open("nn: load mlp", data, mlpMagic, binVersion)
	if err != nil {
		return err
	}
	maxBatch := d.Size("max batch", 1, MaxRows)
	L := d.Size("layers", 1, MaxLayers)
	sizes := d.Ints("sizes", L+1)
	acts := make([]Activation, L)
	for i := range acts {
		acts[i] = Activation(d.Uint8("activation"))
	}
	if err := d.Err(); err != nil {
		return err
	}
	var np uint64
	for l := range acts {
		if sizes[l] < 1 || sizes[l] > MaxWidth || sizes[l+1] < 1 || sizes[l+1] > MaxWidth {
			return d.Fail("sizes", "%v not in 1..%d", sizes, MaxWidth)
		}
		np += uint64(sizes[l])*uint64(sizes[l+1]) + uint64(sizes[l+1])
		if np > maxParams {
			return d.Fail("sizes", "%v: more than %d parameters", sizes, maxParams)
		}
	}
	if d.Count("parameters", 8, int(np)) != int(np) {
		return d.Err()
	}
	n, err := build(sizes, acts, maxBatch)
	if err != nil {
		return d.Fail("shape", "%v", err)
	}
	d.ReadFloat64s("parameters", n.params)
	if err := d.Finish(); err != nil {
		return err
	}
	for i, v := range n.params {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return d.Fail("parameters", "parameter %d is %v", i, v)
		}
	}
	*m = *n
	return nil
}

// MarshalBinary encodes the hyperparameters, step count and moments of o
// exactly (format in the package doc).
func (o *Adam) MarshalBinary() ([]byte, error) {
	e := fileio.NewEncoder(adamMagic, binVersion, 8+4*8+8+16*len(o.M))
	e.Int(len(o.M))
	e.Float64(o.StepSize)
	e.Float64(o.Beta1)
	e.Float64(o.Beta2)
	e.Float64(o.Eps)
	e.Int(o.T)
	e.Float64s(o.M)
	e.Float64s(o.V)
	b, err := e.Seal()
	if err != nil {
		return nil, fmt.Errorf("nn: save adam: %w", err)
	}
	return b, nil
}

// UnmarshalBinary replaces o with the optimiser encoded in data by
// MarshalBinary. It returns an error wrapping ErrCorrupt if data is
// malformed (a non-finite hyperparameter or moment, or a negative second
// moment included), in which case o is unchanged.
func (o *Adam) UnmarshalBinary(data []byte) error {
	d, err := fileio.Open("nn: load adam", data, adamMagic, binVersion)
	if err != nil {
		return err
	}
	n := d.Size("parameters", 0, maxParams)
	lr, b1, b2, eps := d.Float64("lr"), d.Float64("beta1"), d.Float64("beta2"), d.Float64("eps")
	t := d.Size("step", 0, math.MaxInt32)
	if err := d.Err(); err != nil {
		return err
	}
	for _, v := range []float64{lr, b1, b2, eps} {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return d.Fail("hyperparameters", "%v is not finite", v)
		}
	}
	if d.Count("moments", 16, n) != n {
		return d.Err()
	}
	a := &Adam{StepSize: lr, Beta1: b1, Beta2: b2, Eps: eps, T: t, M: d.Float64s("m", n), V: d.Float64s("v", n)}
	if err := d.Finish(); err != nil {
		return err
	}
	for i := range a.M {
		if m, v := a.M[i], a.V[i]; math.IsNaN(m) || math.IsInf(m, 0) || !(v >= 0) || math.IsInf(v, 1) {
			return d.Fail("moments", "moments %v, %v of parameter %d (want finite, the second >= 0)", m, v, i)
		}
	}
	*o = *a
	return nil
}
