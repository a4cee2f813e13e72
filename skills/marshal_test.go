package skills

import (
	"bytes"
	"encoding/binary"
	"errors"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

	"github.com/successor-go/successor/internal/fileio"
)

// trained returns a few discriminators of every kind after some updates,
// so weights and optimiser moments are all non-trivial.
func trained(t testing.TB) []Discriminator {
	t.Helper()
	rng := rand.New(rand.NewPCG(9, 9))
	var out []Discriminator
	for _, c := range []VMFConfig{
		{In: 6, Dim: 3},
		{In: 6, Dim: 4, Kappa: 3, LearnKappa: true, MaxKappa: 50, Optim: OptimConfig{StepSize: 0.01, ClipNorm: 5}},
		{In: 6, Dim: 3, Net: NetConfig{Hidden: []int{5, 4}, Tanh: true, MaxBatch: 3}},
		{In: 6, Dim: 3, LearnKappa: true, Optim: OptimConfig{Method: OptimSparseAdam, ClipNorm: 2}},
	} {
		v, err := NewVMF(&c, rng)
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, v)
	}
	for _, c := range []SoftmaxConfig{
		{In: 6, K: 3, Optim: OptimConfig{Beta1: 0.5}},
		{In: 6, K: 4, Net: NetConfig{Hidden: []int{7}}},
		{In: 6, K: 3, Optim: OptimConfig{Method: OptimSparseAdam}},
	} {
		s, err := NewSoftmax(&c, rng)
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, s)
	}
	for _, d := range out {
		var p Prior = Categorical{K: d.ZDim()}
		if _, ok := d.(*VMF); ok {
			p = UniformSphere{D: d.ZDim()}
		}
		x, z := randBatch(rng, 8, 6, p)
		for range 5 {
			if _, err := d.Update(x, z); err != nil {
				t.Fatal(err)
			}
		}
	}
	// One never updated, with a learned kappa: log kappa alone restores it.
	v, err := NewVMF(&VMFConfig{In: 6, Dim: 5, Kappa: 3.3, LearnKappa: true}, rng)
	if err != nil {
		t.Fatal(err)
	}
	return append(out, v)
}

func TestMarshalRoundTrip(t *testing.T) {
	// Bit-exact: the same bytes again, the same outputs, and the same
	// next updates (weights, Adam moments and kappa all restored).
	rng := rand.New(rand.NewPCG(10, 1))
	for _, d := range trained(t) {
		b, err := Marshal(d)
		if err != nil {
			t.Fatal(err)
		}
		if cap(b) != len(b) {
			t.Errorf("%T: buffer of capacity %d for %d bytes, want one allocation at full size", d, cap(b), len(b))
		}
		e, err := Unmarshal(b)
		if err != nil {
			t.Fatalf("%T: %v", d, err)
		}
		b2, _ := Marshal(e)
		if !bytes.Equal(b, b2) {
			t.Fatalf("%T: re-marshalled bytes differ", d)
		}
		var p Prior = Categorical{K: d.ZDim()}
		if _, ok := d.(*VMF); ok {
			p = UniformSphere{D: d.ZDim()}
		}
		x, z := randBatch(rng, 5, 6, p)
		for range 3 {
			l1, err1 := d.Update(x, z)
			l2, err2 := e.Update(x, z)
			if err1 != nil || err2 != nil || math.Float64bits(l1) != math.Float64bits(l2) {
				t.Fatalf("%T: losses after load %v, %v (%v, %v)", d, l1, l2, err1, err2)
			}
		}
		for i := 0; i < 5; i++ {
			xi, zi := x[i*6:(i+1)*6], z[i*d.ZDim():(i+1)*d.ZDim()]
			if a, b := d.LogProb(xi, zi), e.LogProb(xi, zi); math.Float64bits(a) != math.Float64bits(b) {
				t.Fatalf("%T: log q %v vs %v after identical updates", d, a, b)
			}
		}
		b, _ = Marshal(d)
		b2, _ = Marshal(e)
		if !bytes.Equal(b, b2) {
			t.Fatalf("%T: states differ after identical updates", d)
		}
	}
}

func TestSaveLoad(t *testing.T) {
	dir := t.TempDir()
	for i, d := range trained(t) {
		path := filepath.Join(dir, "disc.bin")
		if err := Save(path, d); err != nil {
			t.Fatal(err)
		}
		e, err := Load(path)
		if err != nil {
			t.Fatal(err)
		}
		if fi, err := os.Stat(path); err != nil {
			t.Error(err)
		} else if runtime.GOOS != "windows" && fi.Mode().Perm() != 0o644 {
			t.Errorf("saved file has mode %v, want 0644", fi.Mode().Perm())
		}
		b1, _ := Marshal(d)
		b2, _ := Marshal(e)
		if !bytes.Equal(b1, b2) {
			t.Fatalf("case %d: loaded state differs", i)
		}
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 1 {
		t.Errorf("%d files left in the directory, want 1 (no temporaries)", len(ents))
	}
	if _, err := Load(filepath.Join(dir, "missing")); err == nil {
		t.Error("loading a missing file succeeded")
	}
}

func TestUnmarshalErrors(t *testing.T) {
	ds := trained(t)
	good, _ := Marshal(ds[1])
	reseal := fileio.Reseal
	mut := func(f func(b []byte)) []byte {
		b := bytes.Clone(good)
		f(b)
		return b
	}
	const p = fileio.HeaderLen // payload offset
	for _, tc := range []struct {
		name string
		b    []byte
	}{
		{"empty", nil},
		{"magic", mut(func(b []byte) { b[0] = 'X' })},
		{"flipped bit", mut(func(b []byte) { b[40] ^= 1 })},
		{"truncated", good[:len(good)-9]},
		{"truncated, resealed", reseal(good[:len(good)-12])},
		{"version 2", reseal(mut(func(b []byte) { b[4] = 2 }))},
		{"kind", reseal(mut(func(b []byte) { b[p] = 9 }))},
		{"in 2^31-1", reseal(mut(func(b []byte) { binary.LittleEndian.PutUint64(b[p+1:], 1<<31-1) }))},
		{"zdim 2^31-1", reseal(mut(func(b []byte) { binary.LittleEndian.PutUint64(b[p+9:], 1<<31-1) }))},
		{"layers 2^31-1", reseal(mut(func(b []byte) { binary.LittleEndian.PutUint64(b[p+17:], 1<<31-1) }))},
		{"negative steps", reseal(mut(func(b []byte) { binary.LittleEndian.PutUint64(b[p+25+1+8+40+1:], math.MaxUint64) }))},
		{"trailing byte", reseal(append(bytes.Clone(good), 0))},
	} {
		if _, err := Unmarshal(tc.b); !errors.Is(err, ErrCorrupt) {
			t.Errorf("%s: %v, want ErrCorrupt", tc.name, err)
		}
	}
	// Every truncation and every single-bit flip.
	for n := range len(good) {
		if _, err := Unmarshal(good[:n]); !errors.Is(err, ErrCorrupt) {
			t.Fatalf("truncated to %d bytes: %v", n, err)
		}
	}
	for i := range 8 * len(good) {
		if _, err := Unmarshal(mut(func(b []byte) { b[i/8] ^= 1 << (i % 8) })); !errors.Is(err, ErrCorrupt) {
			t.Fatalf("bit %d flipped: %v", i, err)
		}
	}
	// Typed loaders reject the other kind and leave the receiver alone.
	soft, _ := Marshal(ds[4])
	v := ds[0].(*VMF)
	before, _ := v.MarshalBinary()
	if err := v.UnmarshalBinary(soft); !errors.Is(err, ErrCorrupt) {
		t.Errorf("vmf from softmax bytes: %v", err)
	}
	after, _ := v.MarshalBinary()
	if !bytes.Equal(before, after) {
		t.Error("failed UnmarshalBinary changed the receiver")
	}
	var s Softmax
	if err := s.UnmarshalBinary(good); !errors.Is(err, ErrCorrupt) {
		t.Errorf("softmax from vmf bytes: %v", err)
	}
	if err := s.UnmarshalBinary(soft); err != nil {
		t.Errorf("softmax from its bytes: %v", err)
	}
	// Non-finite weights are refused.
	nan := bytes.Clone(good)
	binary.LittleEndian.PutUint64(nan[len(nan)-4-8*2:], math.Float64bits(math.NaN())) // a second moment
	if _, err := Unmarshal(reseal(nan)); !errors.Is(err, ErrCorrupt) || !strings.Contains(err.Error(), "non-finite") {
		t.Errorf("NaN moment: %v, want ErrCorrupt naming the non-finite value", err)
	}
	if _, err := Marshal(fixedDisc{}); !errors.Is(err, ErrUnsupported) {
		t.Errorf("Marshal of a foreign type: %v", err)
	}
}

func FuzzUnmarshal(f *testing.F) {
	for _, d := range trained(f) {
		b, _ := Marshal(d)
		f.Add(b)
	}
	f.Add([]byte("SKDS"))
	b, _ := Marshal(trained(f)[0])
	binary.LittleEndian.PutUint64(b[fileio.HeaderLen+1:], 1<<31-1) // in
	f.Add(fileio.Reseal(b))
	for _, off := range []int{1 + 8, 1 + 16} { // zdim, number of hidden layers
		g, _ := Marshal(trained(f)[0])
		binary.LittleEndian.PutUint64(g[fileio.HeaderLen+off:], 1<<62)
		f.Add(fileio.Reseal(g))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		for _, b := range [][]byte{data, fileio.Reseal(data)} {
			d, err := Unmarshal(b)
			if err != nil {
				if !errors.Is(err, ErrCorrupt) {
					t.Fatalf("error %v does not wrap ErrCorrupt", err)
				}
				continue
			}
			b2, err := Marshal(d)
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(b, b2) {
				t.Fatalf("round trip changed %d bytes into %d", len(b), len(b2))
			}
		}
	})
}
