package skills

import (
	"bytes"
	"encoding/binary"
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/internal/fileio"
	"github.com/successor-go/successor/internal/nn"
)

func TestSparseAdamTwoSteps(t *testing.T) {
	// Two sparse Adam steps on a linear map with 3 input rows and 2
	// outputs, parameters starting at 0, against values derived by hand
	// from Kingma & Ba (2015, Algorithm 1) with zero initial moments:
	//   first update of an entry at global step t with gradient g, after
	//   t-1 skipped steps: m = (1-b1) g, v = (1-b2) g^2, so
	//   delta = -lr (1-b1) g/(1-b1^t) / (sqrt((1-b2) g^2/(1-b2^t)) + eps);
	//   t = 1: delta = -lr g/(|g| + eps);
	//   t = 2: delta = -lr g/(1+b1) / (|g|/sqrt(1+b2) + eps);
	//   the same gradient g at t = 1 and 2: m = (1-b1^2) g, v = (1-b2^2) g^2,
	//   so the second delta is again -lr g/(|g| + eps).
	// Step 1 touches row 0, step 2 touches row 2; row 1 never.
	const lr, b1, b2, eps = 0.1, 0.9, 0.999, 1e-8
	a := nn.NewAdam(8, &nn.AdamConfig{StepSize: lr, Beta1: b1, Beta2: b2, Eps: eps})
	p := make([]float64, 8)
	g1 := []float64{0.5, -2, 0, 0, 0, 0, 1, 0}  // row 0 and bias (1, 0)
	g2 := []float64{0, 0, 0, 0, 3, -0.25, 1, 4} // row 2 and bias (1, 4)
	sparseAdamStep(a, p, g1, []int{0}, 2)
	sparseAdamStep(a, p, g2, []int{2}, 2)
	first := func(g float64) float64 { return -lr * g / (math.Abs(g) + eps) }
	second := func(g float64) float64 { return -lr * g / (1 + b1) / (math.Abs(g)/math.Sqrt(1+b2) + eps) }
	want := []float64{
		first(0.5), first(-2), // row 0: moved at step 1 only
		0, 0, // row 1: never touched
		second(3), second(-0.25), // row 2: first touched at step 2
		2 * first(1), second(4), // bias: touched both times
	}
	for i := range want {
		if math.Abs(p[i]-want[i]) > 1e-14 {
			t.Errorf("param %d: %.17g, want %.17g (derived by hand, see comment)", i, p[i], want[i])
		}
	}
	// Row 0's moments were not decayed at step 2.
	beta1, beta2 := b1, b2 // run-time arithmetic, as in the optimiser
	if a.M[0] != (1-beta1)*0.5 || a.V[1] != (1-beta2)*(-2)*(-2) || a.T != 2 {
		t.Errorf("row 0 moments %v, %v, step %d: want undecayed (1-b1) 0.5, (1-b2) 4 and global step 2", a.M[0], a.V[1], a.T)
	}
	// Dense Adam on the same gradients moves row 0 again at step 2, by
	// -lr (b1/(1+b1)) g / (|g| sqrt(b2/(1+b2)) + eps) (derived by hand
	// as above): the two optimisers differ.
	d := nn.NewAdam(8, &nn.AdamConfig{StepSize: lr, Beta1: b1, Beta2: b2, Eps: eps})
	q := make([]float64, 8)
	d.Step(q, g1)
	d.Step(q, g2)
	dense0 := first(0.5) - lr*(b1/(1+b1))*0.5/(0.5*math.Sqrt(b2/(1+b2))+eps)
	if math.Abs(q[0]-dense0) > 1e-14 || q[0] == p[0] {
		t.Errorf("dense row 0: %.17g, want %.17g and different from sparse %.17g", q[0], dense0, p[0])
	}
}

// sparsePair returns the same discriminator built with dense and with
// sparse Adam, from the same seed.
func sparsePair(t *testing.T, kind string, opt OptimConfig) (dense, sparse Discriminator) {
	t.Helper()
	build := func(m OptimMethod) Discriminator {
		o := opt
		o.Method = m
		rng := rand.New(rand.NewPCG(21, 4))
		var d Discriminator
		var err error
		if kind == "vmf" {
			d, err = NewVMF(&VMFConfig{In: 5, Dim: 3, Kappa: 2, LearnKappa: true, Optim: o}, rng)
		} else {
			d, err = NewSoftmax(&SoftmaxConfig{In: 5, K: 3, Optim: o}, rng)
		}
		if err != nil {
			t.Fatal(err)
		}
		return d
	}
	return build(OptimAdam), build(OptimSparseAdam)
}

func discCore(d Discriminator) *core {
	switch d := d.(type) {
	case *VMF:
		return &d.core
	case *Softmax:
		return &d.core
	}
	panic("skills: test: unknown discriminator")
}

func sameBits(a, b []float64) bool {
	for i := range a {
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
			return false
		}
	}
	return len(a) == len(b)
}

func TestSparseAdamMatchesDense(t *testing.T) {
	// On minibatches that touch every row of W, sparse Adam performs
	// exactly dense Adam's arithmetic on every entry and the same
	// gradient-norm sum (the skipped terms of the dense sum are exact
	// zeros), so weights, moments and losses agree bit for bit (derived
	// by hand, see OptimSparseAdam).
	for _, kind := range []string{"vmf", "softmax"} {
		for _, clip := range []float64{0, 0.05} {
			for _, oneHot := range []bool{true, false} {
				de, sp := sparsePair(t, kind, OptimConfig{StepSize: 0.05, ClipNorm: clip})
				rng := rand.New(rand.NewPCG(5, 5))
				var p Prior = Categorical{K: 3}
				if kind == "vmf" {
					p = UniformSphere{D: 3}
				}
				for step := range 12 {
					// 8 rows: every state once (one-hot), then 3 at random;
					// or dense Gaussian rows.
					x, z := randBatch(rng, 8, 5, p)
					if oneHot {
						for i := range 8 {
							s := i
							if i >= 5 {
								s = rng.IntN(5)
							}
							OneHot(x[i*5:(i+1)*5], s)
						}
					}
					l1, err1 := de.Update(x, z)
					l2, err2 := sp.Update(x, z)
					if err1 != nil || err2 != nil || math.Float64bits(l1) != math.Float64bits(l2) {
						t.Fatalf("%s clip %g one-hot %v step %d: losses %v, %v (%v, %v)", kind, clip, oneHot, step, l1, l2, err1, err2)
					}
				}
				c1, c2 := discCore(de), discCore(sp)
				if !sameBits(c1.enc.params(), c2.enc.params()) || !sameBits(c1.adam.M, c2.adam.M) || !sameBits(c1.adam.V, c2.adam.V) || c1.adam.T != c2.adam.T {
					t.Errorf("%s clip %g one-hot %v: sparse and dense states differ", kind, clip, oneHot)
				}
			}
		}
	}
}

func TestSparseAdamSkipsUntouched(t *testing.T) {
	// One-hot minibatches over states 0..2 of 5: the first update equals
	// dense Adam's bit for bit (all moments start at 0, so dense Adam does
	// not move a zero-gradient entry either); rows 3 and 4 then never move
	// and keep zero moments, while dense Adam keeps moving the rows it
	// touched earlier even when a later batch misses them.
	for _, kind := range []string{"vmf", "softmax"} {
		de, sp := sparsePair(t, kind, OptimConfig{StepSize: 0.05})
		c1, c2 := discCore(de), discCore(sp)
		init := append([]float64(nil), c2.enc.params()...)
		rng := rand.New(rand.NewPCG(6, 6))
		var p Prior = Categorical{K: 3}
		if kind == "vmf" {
			p = UniformSphere{D: 3}
		}
		x, z := randBatch(rng, 4, 5, p)
		for i := range 4 {
			OneHot(x[i*5:(i+1)*5], i%3)
		}
		de.Update(x, z)
		sp.Update(x, z)
		if !sameBits(c1.enc.params(), c2.enc.params()) {
			t.Errorf("%s: first updates differ", kind)
		}
		// Now only state 2: rows 0 and 1 stay put in sparse Adam only.
		x2, z2 := x[2*5:3*5], z[2*3:3*3]
		after1 := append([]float64(nil), c2.enc.params()...)
		de.Update(x2, z2)
		sp.Update(x2, z2)
		w2 := c2.enc.params()
		if !sameBits(w2[:2*3], after1[:2*3]) {
			t.Errorf("%s: sparse Adam moved rows 0 and 1, untouched by the batch", kind)
		}
		if sameBits(c1.enc.params()[:2*3], after1[:2*3]) {
			t.Errorf("%s: dense Adam did not move rows 0 and 1 by momentum", kind)
		}
		if !sameBits(w2[3*3:5*3], init[3*3:5*3]) || !sameBits(c2.adam.M[3*3:5*3], make([]float64, 6)) {
			t.Errorf("%s: rows 3 and 4 changed", kind)
		}
	}
}

func TestSparseGradient(t *testing.T) {
	// After updates on other states, the gradient of a one-hot batch
	// (only the touched rows are cleared between updates) still matches
	// central differences on every parameter (common practice).
	for _, kind := range []string{"vmf", "softmax"} {
		_, sp := sparsePair(t, kind, OptimConfig{StepSize: 0.05})
		rng := rand.New(rand.NewPCG(7, 7))
		var p Prior = Categorical{K: 3}
		if kind == "vmf" {
			p = UniformSphere{D: 3}
		}
		for s := range 5 {
			x, z := randBatch(rng, 2, 5, p)
			OneHot(x[:5], s)
			OneHot(x[5:], (s+2)%5)
			sp.Update(x, z)
		}
		x, z := randBatch(rng, 3, 5, p)
		for i := range 3 {
			OneHot(x[i*5:(i+1)*5], 1+i%2)
		}
		switch d := sp.(type) {
		case *VMF:
			gradCheck(t, "sparse vmf", d, &d.core, x, z)
		case *Softmax:
			gradCheck(t, "sparse softmax", d, &d.core, x, z)
		}
	}
}

func TestSparseConfigAndFormat(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 8))
	if _, err := NewVMF(&VMFConfig{In: 4, Dim: 3, Net: NetConfig{Hidden: []int{4}}, Optim: OptimConfig{Method: OptimSparseAdam}}, rng); !errors.Is(err, ErrConfig) {
		t.Errorf("sparse adam with a hidden layer: %v, want ErrConfig", err)
	}
	if _, err := NewSoftmax(&SoftmaxConfig{In: 4, K: 3, Optim: OptimConfig{Method: 7}}, rng); !errors.Is(err, ErrConfig) {
		t.Errorf("optimiser 7: %v, want ErrConfig", err)
	}
	// Both optimisers are written as format version 3 with the method
	// byte; each round-trips.
	de, sp := sparsePair(t, "softmax", OptimConfig{})
	bd, _ := Marshal(de)
	bs, _ := Marshal(sp)
	for _, b := range [][]byte{bd, bs} {
		if v := binary.LittleEndian.Uint32(b[4:]); v != 3 {
			t.Errorf("written as version %d, want 3", v)
		}
	}
	for _, tc := range []struct {
		b    []byte
		want OptimMethod
	}{{bd, OptimAdam}, {bs, OptimSparseAdam}} {
		e, err := Unmarshal(tc.b)
		if err != nil || discCore(e).opt.Method != tc.want {
			t.Fatalf("%v round trip: %v", tc.want, err)
		}
	}
	// Payload of a linear softmax: kind 1, in 8, zdim 8, layers 8, tanh 1,
	// maxBatch 8, optim 40: the method byte follows, after the 16-byte
	// header.
	const at = fileio.HeaderLen + 1 + 8 + 8 + 8 + 1 + 8 + 40
	if bs[at] != uint8(OptimSparseAdam) || bd[at] != uint8(OptimAdam) {
		t.Fatalf("method bytes %d, %d at offset %d, want %d, %d", bs[at], bd[at], at, OptimSparseAdam, OptimAdam)
	}
	// An unknown method is refused.
	for _, m := range []uint8{2, 9} {
		b := bytes.Clone(bs)
		b[at] = m
		if _, err := Unmarshal(fileio.Reseal(b)); !errors.Is(err, ErrCorrupt) {
			t.Errorf("method %d: %v, want ErrCorrupt", m, err)
		}
	}
}

func TestOptimMethodText(t *testing.T) {
	for _, m := range []OptimMethod{OptimAdam, OptimSparseAdam} {
		b, err := m.MarshalText()
		if err != nil {
			t.Fatal(err)
		}
		var got OptimMethod = 9
		if err := got.UnmarshalText(b); err != nil || got != m {
			t.Errorf("%v: round trip %v, %v", m, got, err)
		}
	}
	var m OptimMethod
	if err := m.UnmarshalText([]byte("lazy")); !errors.Is(err, ErrConfig) {
		t.Errorf("unknown name: %v, want ErrConfig", err)
	}
	if _, err := OptimMethod(5).MarshalText(); !errors.Is(err, ErrConfig) {
		t.Errorf("method 5: %v, want ErrConfig", err)
	}
	_, sp := sparsePair(t, "vmf", OptimConfig{})
	if o := sp.(*VMF).Optim(); o.Method != OptimSparseAdam || o.StepSize != 1e-3 {
		t.Errorf("Optim() = %+v, want sparse adam with the default learn rate 1e-3", o)
	}
}
