package nn

import (
	"bytes"
	"encoding/binary"
	"errors"
	"hash/crc32"
	"math"
	"math/rand/v2"
	"testing"
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
	oa := NewAdam(a.NumParams(), &AdamConfig{LR: 0.01})
	trainSteps(a, oa, x, target, n, 2*steps)

	b, _ := New(cfg, rand.New(rand.NewPCG(1, 1)))
	ob := NewAdam(b.NumParams(), &AdamConfig{LR: 0.01})
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
	flip := func(b []byte, i int) []byte {
		c := bytes.Clone(b)
		c[i] ^= 1
		return c
	}
	for _, tc := range []struct {
		name string
		b    []byte
		adam bool
	}{
		{"empty", nil, false},
		{"short", good[:10], false},
		{"magic", flip(good, 0), false},
		{"payload bit", flip(good, 30), false},
		{"checksum bit", flip(good, len(good)-1), false},
		{"truncated", good[:len(good)-5], false},
		{"adam as mlp", goodA, false},
		{"mlp as adam", good, true},
		{"adam bit", flip(goodA, 20), true},
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
}

// FuzzLoadMLP checks that the loader never panics, and that whatever it
// accepts marshals back to the same bytes.
func FuzzLoadMLP(f *testing.F) {
	net, _ := New(&Config{Sizes: []int{2, 3, 1}}, rand.New(rand.NewPCG(1, 2)))
	b, _ := net.MarshalBinary()
	f.Add(b)
	f.Add(b[:len(b)-1])
	f.Add([]byte("NNML"))
	f.Fuzz(func(t *testing.T, data []byte) {
		mlpRoundTrip(t, data)
		mlpRoundTrip(t, reseal(data))
	})
}

// reseal replaces the last four bytes of data by the CRC-32 of the rest,
// so that fuzzed mutations reach the field checks, not only the checksum.
func reseal(data []byte) []byte {
	if len(data) < 4 {
		return data
	}
	body := bytes.Clone(data[:len(data)-4])
	return binary.LittleEndian.AppendUint32(body, crc32.ChecksumIEEE(body))
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
	f.Fuzz(func(t *testing.T, data []byte) {
		adamRoundTrip(t, data)
		adamRoundTrip(t, reseal(data))
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
