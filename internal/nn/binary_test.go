package nn

import (
	"bytes"
	"encoding/binary"
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/internal/fileio"
)

func sameBits(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
			return false
		}
	}
	return true
}

// trainSteps runs k MSE updates of net with opt on fixed data.
func trainSteps(net *MLP, opt *Adam, x, target []float64, n, k int) {
	dy := make([]float64, len(target))
	for range k {
		y := net.Forward(x, n)
		MSE(dy, y, target, nil, n)
		net.Backward(nil, dy)
		ClipNorm(net.Grad(), 1)
		opt.Step(net.Params(), net.Grad())
	}
}

// TestSaveLoadResume trains N steps, saves network and optimiser, loads
// them into fresh values, trains N more, and compares bit for bit with 2N
// uninterrupted steps.
func TestSaveLoadResume(t *testing.T) {
	const n, steps = 8, 20
	rng := rand.New(rand.NewPCG(11, 12))
	cfg := &Config{Sizes: []int{6, 16, 16, 3}, Acts: []Activation{ReLU, Tanh, Identity}, MaxBatch: n}
	x := randSlice(rng, n*6)
	target := randSlice(rng, n*3)

	a, _ := New(cfg, rand.New(rand.NewPCG(1, 1)))
	oa := NewAdam(a.NumParams(), &AdamConfig{StepSize: 0.01})
	trainSteps(a, oa, x, target, n, 2*steps)

	b, _ := New(cfg, rand.New(rand.NewPCG(1, 1)))
	ob := NewAdam(b.NumParams(), &AdamConfig{StepSize: 0.01})
	trainSteps(b, ob, x, target, n, steps)
	nb, err := b.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	ab, err := ob.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	var c MLP
	if err := c.UnmarshalBinary(nb); err != nil {
		t.Fatal(err)
	}
	var oc Adam
	if err := oc.UnmarshalBinary(ab); err != nil {
		t.Fatal(err)
	}
	trainSteps(&c, &oc, x, target, n, steps)
	if !sameBits(a.Params(), c.Params()) || !sameBits(oa.M, oc.M) || !sameBits(oa.V, oc.V) || oa.T != oc.T {
		t.Fatal("resumed training differs from uninterrupted training")
	}
	if c.MaxBatch() != n || !c.SameShape(a) {
		t.Fatal("loaded shape differs")
	}
}

func TestLoadCorrupt(t *testing.T) {
	rng := rand.New(rand.NewPCG(2, 3))
	net, _ := New(&Config{Sizes: []int{3, 4, 2}}, rng)
	good, _ := net.MarshalBinary()
	opt := NewAdam(net.NumParams(), nil)
	goodA, _ := opt.MarshalBinary()
	if cap(good) != len(good) || cap(goodA) != len(goodA) {
		t.Errorf("buffers of capacity %d, %d for %d, %d bytes, want one allocation at full size", cap(good), cap(goodA), len(good), len(goodA))
	}
	flip := func(b []byte, i int) []byte {
		c := bytes.Clone(b)
		c[i] ^= 1
		return c
	}
	// put writes v at byte off of a copy of b and reseals it, so that the
	// field check, not the checksum, rejects it.
	put := func(b []byte, off int, v uint64) []byte {
		c := bytes.Clone(b)
		binary.LittleEndian.PutUint64(c[off:], v)
		return fileio.Reseal(c)
	}
	const p = fileio.HeaderLen // payload offset
	for _, tc := range []struct {
		name string
		b    []byte
		adam bool
	}{
		{"empty", nil, false},
		{"short", good[:10], false},
		{"magic", flip(good, 0), false},
		{"version 1", fileio.Reseal(func() []byte { c := bytes.Clone(good); c[4] = 1; return c }()), false},
		{"payload bit", flip(good, 30), false},
		{"checksum bit", flip(good, len(good)-1), false},
		{"truncated", good[:len(good)-5], false},
		{"truncated, resealed", fileio.Reseal(good[:len(good)-5]), false},
		{"trailing bytes, resealed", fileio.Reseal(append(bytes.Clone(good), 0, 0, 0, 0, 0, 0, 0, 0)), false},
		{"adam as mlp", goodA, false},
		{"mlp as adam", good, true},
		{"adam bit", flip(goodA, 20), true},
		{"max batch 2^31-1", put(good, p, 1<<31-1), false},
		{"layers 2^31-1", put(good, p+8, 1<<31-1), false},
		{"width 2^31-1", put(good, p+16, 1<<31-1), false},
		{"negative width", put(good, p+16, math.MaxUint64), false},
		{"activation 9", fileio.Reseal(func() []byte { c := bytes.Clone(good); c[p+16+3*8] = 9; return c }()), false},
		{"adam count 2^31-1", put(goodA, p, 1<<31-1), true},
		{"adam negative step", put(goodA, p+8+4*8, math.MaxUint64), true},
		{"adam NaN eps", put(goodA, p+8+3*8, math.Float64bits(math.NaN())), true},
	} {
		var err error
		if tc.adam {
			var o Adam
			err = o.UnmarshalBinary(tc.b)
		} else {
			var m MLP
			err = m.UnmarshalBinary(tc.b)
		}
		if !errors.Is(err, ErrCorrupt) {
			t.Errorf("%s: err %v, want ErrCorrupt", tc.name, err)
		}
	}
	// Every truncation and every single-bit flip (CRC-32C detects them
	// all).
	for _, b := range [][]byte{good, goodA} {
		for n := range len(b) {
			var m MLP
			var o Adam
			if m.UnmarshalBinary(b[:n]) == nil || o.UnmarshalBinary(b[:n]) == nil {
				t.Fatalf("truncated to %d of %d bytes: accepted", n, len(b))
			}
		}
		for i := range 8 * len(b) {
			c := bytes.Clone(b)
			c[i/8] ^= 1 << (i % 8)
			var m MLP
			var o Adam
			if err := m.UnmarshalBinary(c); !errors.Is(err, ErrCorrupt) {
				t.Fatalf("bit %d flipped: mlp %v", i, err)
			}
			if err := o.UnmarshalBinary(c); !errors.Is(err, ErrCorrupt) {
				t.Fatalf("bit %d flipped: adam %v", i, err)
			}
		}
	}
}

// giant returns b resealed with the int64 at payload offset off set to
// 2^31-1, a header that claims far more than the bytes present.
func giant(b []byte, off int) []byte {
	c := bytes.Clone(b)
	binary.LittleEndian.PutUint64(c[fileio.HeaderLen+off:], 1<<31-1)
	return fileio.Reseal(c)
}

// FuzzLoadMLP checks that the loader never panics, and that whatever it
// accepts marshals back to the same bytes.
func FuzzLoadMLP(f *testing.F) {
	net, _ := New(&Config{Sizes: []int{2, 3, 1}}, rand.New(rand.NewPCG(1, 2)))
	b, _ := net.MarshalBinary()
	f.Add(b)
	f.Add(b[:len(b)-1])
	f.Add([]byte("NNML"))
	f.Add(giant(b, 8))  // layers
	f.Add(giant(b, 16)) // first width
	f.Add(giant(b, 0))  // max batch
	f.Fuzz(func(t *testing.T, data []byte) {
		mlpRoundTrip(t, data)
		mlpRoundTrip(t, fileio.Reseal(data))
	})
}

func mlpRoundTrip(t *testing.T, data []byte) {
	var m MLP
	if err := m.UnmarshalBinary(data); err != nil {
		if !errors.Is(err, ErrCorrupt) {
			t.Fatalf("error %v does not wrap ErrCorrupt", err)
		}
		return
	}
	out, err := m.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(out, data) {
		t.Fatal("accepted bytes do not round-trip")
	}
}

// FuzzLoadAdam is FuzzLoadMLP for the optimiser.
func FuzzLoadAdam(f *testing.F) {
	o := NewAdam(3, nil)
	o.Step([]float64{1, 2, 3}, []float64{0.1, -0.2, 0.3})
	b, _ := o.MarshalBinary()
	f.Add(b)
	f.Add([]byte("NNAD"))
	f.Add(giant(b, 0)) // parameter count
	f.Fuzz(func(t *testing.T, data []byte) {
		adamRoundTrip(t, data)
		adamRoundTrip(t, fileio.Reseal(data))
	})
}

func adamRoundTrip(t *testing.T, data []byte) {
	var a Adam
	if err := a.UnmarshalBinary(data); err != nil {
		if !errors.Is(err, ErrCorrupt) {
			t.Fatalf("error %v does not wrap ErrCorrupt", err)
		}
		return
	}
	out, err := a.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(out, data) {
		t.Fatal("accepted bytes do not round-trip")
	}
}

// TestLoadNonFinite checks that a network with a NaN or infinite
// parameter, and an optimiser with a non-finite moment or a negative
// second moment, are refused as corrupt under a valid checksum (they used
// to load, and the next forward pass or step gave NaN).
func TestLoadNonFinite(t *testing.T) {
	net, _ := New(&Config{Sizes: []int{2, 3, 1}}, rand.New(rand.NewPCG(1, 2)))
	nb, _ := net.MarshalBinary()
	o := NewAdam(3, nil)
	o.Step([]float64{1, 2, 3}, []float64{0.1, -0.2, 0.3})
	ob, _ := o.MarshalBinary()
	put := func(b []byte, at int, v float64) []byte {
		c := bytes.Clone(b)
		binary.LittleEndian.PutUint64(c[at:], math.Float64bits(v))
		return fileio.Reseal(c)
	}
	last := func(b []byte) int { return len(b) - fileio.TrailerLen - 8 } // the last float of the payload
	for _, v := range []float64{math.NaN(), math.Inf(1)} {
		var m MLP
		if err := m.UnmarshalBinary(put(nb, last(nb), v)); !errors.Is(err, ErrCorrupt) {
			t.Errorf("mlp parameter %v: error %v, want ErrCorrupt", v, err)
		}
		var a Adam
		if err := a.UnmarshalBinary(put(ob, last(ob)-8*3, v)); !errors.Is(err, ErrCorrupt) {
			t.Errorf("adam first moment %v: error %v, want ErrCorrupt", v, err)
		}
	}
	var a Adam
	if err := a.UnmarshalBinary(put(ob, last(ob), -1)); !errors.Is(err, ErrCorrupt) {
		t.Errorf("adam negative second moment: error %v, want ErrCorrupt", err)
	}
	if err := a.UnmarshalBinary(ob); err != nil {
		t.Errorf("unaltered adam: %v", err)
	}
}
