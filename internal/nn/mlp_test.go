package nn

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/internal/testtol"
)

// tolFD is the relative error allowed between backward and central
// differences; the tiers are in internal/testtol.
const tolFD = 1e-6

func randSlice(rng *rand.Rand, n int) []float64 {
	v := make([]float64, n)
	for i := range v {
		v[i] = rng.NormFloat64()
	}
	return v
}

// relErr is |a-b| / max(|a|, |b|, 1e-8): the usual relative error for
// gradient checks, with a floor so that two near-zero values compare
// absolutely.
func relErr(a, b float64) float64 {
	return math.Abs(a-b) / math.Max(math.Max(math.Abs(a), math.Abs(b)), 1e-8)
}

// lossFn is a scalar loss of the network outputs and its gradient.
type lossFn func(dy, y []float64, n, out int) float64

// weighted is L = sum_ij c_ij y_ij with fixed random c: it checks every
// output entry of a layer with its own weight.
func weighted(c []float64) lossFn {
	return func(dy, y []float64, n, out int) float64 {
		var s float64
		for i, v := range y {
			s += c[i] * v
			dy[i] = c[i]
		}
		return s
	}
}

// checkGrad compares Backward with central finite differences of loss for
// every parameter and every input entry. It shifts inputs away from ReLU
// kinks by resampling to keep the differences smooth.
func checkGrad(t *testing.T, net *MLP, x []float64, n int, loss lossFn) {
	t.Helper()
	out := net.Out()
	dy := make([]float64, n*out)
	f := func() float64 {
		y := net.Forward(x, n)
		return loss(dy, y, n, out)
	}
	f()
	dx := make([]float64, len(x))
	net.Backward(dx, dy)
	grad := append([]float64(nil), net.Grad()...)
	const h = 1e-6
	check := func(what string, v []float64, i int, analytic float64) {
		old := v[i]
		v[i] = old + h
		fp := f()
		v[i] = old - h
		fm := f()
		v[i] = old
		num := (fp - fm) / (2 * h)
		if e := relErr(num, analytic); e > tolFD && math.Abs(num-analytic) > 1e-9 {
			t.Errorf("%s[%d]: backward %.10g, central difference %.10g, rel err %.2e", what, i, analytic, num, e)
		}
	}
	p := net.Params()
	for i := range p {
		check("param", p, i, grad[i])
	}
	for i := range x {
		check("input", x, i, dx[i])
	}
}

// TestBackwardFiniteDifference checks Backward against central finite
// differences (step 1e-6, relative error < 1e-6 or absolute < 1e-9 for
// near-zero derivatives) for each activation, a deep mixed network, and the
// MSE and softmax cross-entropy losses. Common practice for backprop.
func TestBackwardFiniteDifference(t *testing.T) {
	for _, tc := range []struct {
		name  string
		sizes []int
		acts  []Activation
		n     int
		loss  string
	}{
		{"identity", []int{5, 4}, []Activation{Identity}, 3, "weighted"},
		{"relu", []int{5, 4}, []Activation{ReLU}, 3, "weighted"},
		{"tanh", []int{5, 4}, []Activation{Tanh}, 3, "weighted"},
		{"relu-tanh-identity", []int{6, 7, 5, 3}, []Activation{ReLU, Tanh, Identity}, 4, "weighted"},
		{"default-mse", []int{7, 9, 9, 6}, nil, 5, "mse"},
		{"masked-mse", []int{7, 9, 9, 6}, nil, 5, "masked"},
		{"softmax-ce", []int{4, 8, 3}, []Activation{Tanh, Identity}, 6, "ce"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(1, 2))
			net, err := New(&Config{Sizes: tc.sizes, Acts: tc.acts, MaxBatch: tc.n}, rng)
			if err != nil {
				t.Fatal(err)
			}
			// Random biases too, so ReLU units are a mix of on and off.
			for l := range tc.sizes[1:] {
				_, b := net.Layer(l)
				for i := range b {
					b[i] = 0.3 * rng.NormFloat64()
				}
			}
			out := net.Out()
			x := randSlice(rng, tc.n*net.In())
			var loss lossFn
			switch tc.loss {
			case "weighted":
				loss = weighted(randSlice(rng, tc.n*out))
			case "mse", "masked":
				target := randSlice(rng, tc.n*out)
				var mask []float64
				if tc.loss == "masked" {
					mask = make([]float64, tc.n*out)
					for i := range mask {
						mask[i] = float64(rng.IntN(2))
					}
				}
				loss = func(dy, y []float64, n, out int) float64 { return MSE(dy, y, target, mask, n) }
			case "ce":
				labels := make([]int, tc.n)
				for i := range labels {
					labels[i] = rng.IntN(out)
				}
				loss = func(dy, y []float64, n, out int) float64 { return SoftmaxCrossEntropy(dy, y, labels, n, out) }
			}
			checkGrad(t, net, x, tc.n, loss)
		})
	}
}

// TestGemmBlocks checks the blocked BLAS product against the plain loop for
// every transpose case and shapes that cross block edges.
func TestGemmBlocks(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for _, sh := range [][3]int{{1, 1, 1}, {3, 5, 7}, {64, 192, 10}, {65, 193, 17}, {130, 400, 33}} {
		m, n, k := sh[0], sh[1], sh[2]
		for _, tr := range [][2]bool{{false, false}, {true, false}, {false, true}, {true, true}} {
			tA, tB := tr[0], tr[1]
			lda, ldb := k, n
			if tA {
				lda = m
			}
			if tB {
				ldb = k
			}
			a := randSlice(rng, m*k)
			b := randSlice(rng, k*n)
			c0 := randSlice(rng, m*n)
			c1 := append([]float64(nil), c0...)
			gemm(tA, tB, m, n, k, 1.5, a, lda, b, ldb, 0.5, c0, n)
			gemmLoop(tA, tB, m, n, k, 1.5, a, lda, b, ldb, 0.5, c1, n)
			for i := range c0 {
				if math.Abs(c0[i]-c1[i]) > testtol.Exact*(1+math.Abs(c1[i]))*float64(k) {
					t.Fatalf("shape %v trans %v: c[%d] = %v, loop %v", sh, tr, i, c0[i], c1[i])
				}
			}
		}
	}
}

// TestAdamTwoSteps checks Adam against a two-step example derived by hand
// from Kingma & Ba 2015, Algorithm 1, with alpha = 0.1, beta1 = 0.9,
// beta2 = 0.999, eps = 1e-8, theta_0 = 1 and gradients g_1 = 2, g_2 = -1:
//
//	t = 1: m = 0.1*2 = 0.2,            v = 0.001*4 = 0.004
//	       mh = 0.2/0.1 = 2,           vh = 0.004/0.001 = 4
//	       theta_1 = 1 - 0.1*2/(2+1e-8)                 = 0.9 + 5e-10 (approx.)
//	t = 2: m = 0.9*0.2 + 0.1*(-1) = 0.08
//	       v = 0.999*0.004 + 0.001*1 = 0.004996
//	       mh = 0.08/0.19 = 0.42105263157894735
//	       vh = 0.004996/0.001999 = 2.499249624812406
//	       theta_2 = theta_1 - 0.1*mh/(sqrt(vh)+1e-8)
//	               = theta_1 - 0.1*0.42105263157894735/1.5809015228...
//	               = theta_1 - 0.0266337038...
//
// The constants below are these numbers; the test allows 1e-12.
func TestAdamTwoSteps(t *testing.T) {
	o := NewAdam(1, &AdamConfig{StepSize: 0.1})
	theta := []float64{1}
	o.Step(theta, []float64{2})
	want1 := 1 - 0.1*2/(2+1e-8) // derived by hand, see comment
	if math.Abs(theta[0]-want1) > testtol.Exact {
		t.Fatalf("theta_1 = %.17g, want %.17g", theta[0], want1)
	}
	if math.Abs(o.M[0]-0.2) > testtol.Exact || math.Abs(o.V[0]-0.004) > testtol.Exact {
		t.Fatalf("moments after step 1: %v %v, want 0.2 0.004", o.M[0], o.V[0])
	}
	o.Step(theta, []float64{-1})
	mh := 0.08 / 0.19         // derived by hand, see comment
	vh := 0.004996 / 0.001999 // derived by hand, see comment
	want2 := want1 - 0.1*mh/(math.Sqrt(vh)+1e-8)
	if math.Abs(theta[0]-want2) > testtol.Exact {
		t.Fatalf("theta_2 = %.17g, want %.17g", theta[0], want2)
	}
	// The step taken at t = 2 is 0.0266337038 to 10 digits (derived by
	// hand, see comment; sqrt(2.4992496248) = 1.5809015228).
	if d := want1 - theta[0]; math.Abs(d-0.0266337038) > 1e-10 {
		t.Fatalf("second step %.10f, want 0.0266337038", d)
	}
	if o.T != 2 || math.Abs(o.M[0]-0.08) > testtol.Exact || math.Abs(o.V[0]-0.004996) > testtol.Exact {
		t.Fatalf("state after step 2: t=%d m=%v v=%v", o.T, o.M[0], o.V[0])
	}
}

func TestClipNorm(t *testing.T) {
	g := []float64{3, 4} // norm 5, derived by hand
	if n := ClipNorm(g, 10); n != 5 || g[0] != 3 || g[1] != 4 {
		t.Fatalf("no-op clip changed g: norm %v g %v", n, g)
	}
	if n := ClipNorm(g, 1); n != 5 || math.Abs(g[0]-0.6) > testtol.Exact || math.Abs(g[1]-0.8) > testtol.Exact {
		t.Fatalf("clip to 1: norm %v g %v, want 5 [0.6 0.8]", n, g)
	}
}

func TestCopyBlend(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	a, _ := New(&Config{Sizes: []int{3, 4, 2}}, rng)
	b, _ := New(&Config{Sizes: []int{3, 4, 2}}, rng)
	pa := append([]float64(nil), a.Params()...)
	pb := append([]float64(nil), b.Params()...)
	a.Blend(b, 0.25)
	for i := range pa {
		if want := 0.75*pa[i] + 0.25*pb[i]; math.Abs(a.Params()[i]-want) > testtol.Exact {
			t.Fatalf("blend[%d] = %v, want %v", i, a.Params()[i], want)
		}
	}
	a.CopyFrom(b)
	for i := range pb {
		if a.Params()[i] != pb[i] {
			t.Fatalf("copy[%d] differs", i)
		}
	}
	c := b.Clone()
	x := randSlice(rng, 3)
	yb := append([]float64(nil), b.Forward(x, 1)...)
	yc := c.Forward(x, 1)
	for i := range yb {
		if yb[i] != yc[i] {
			t.Fatalf("clone output differs")
		}
	}
}

func TestDeterministicInit(t *testing.T) {
	cfg := &Config{Sizes: []int{10, 16, 4}}
	a, _ := New(cfg, rand.New(rand.NewPCG(7, 8)))
	b, _ := New(cfg, rand.New(rand.NewPCG(7, 8)))
	for i, v := range a.Params() {
		if math.Float64bits(v) != math.Float64bits(b.Params()[i]) {
			t.Fatal("same seed gave different weights")
		}
	}
}

func TestNewErrors(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	for _, cfg := range []*Config{
		nil,
		{Sizes: []int{3}},
		{Sizes: []int{3, 0}},
		{Sizes: []int{3, 2}, Acts: []Activation{ReLU, ReLU}},
		{Sizes: []int{3, 2}, Acts: []Activation{7}},
		{Sizes: []int{3, 2}, MaxBatch: -1},
	} {
		if _, err := New(cfg, rng); !errors.Is(err, ErrConfig) {
			t.Errorf("config %+v: err %v, want ErrConfig", cfg, err)
		}
	}
	if _, err := New(&Config{Sizes: []int{3, 2}}, nil); !errors.Is(err, ErrConfig) {
		t.Errorf("nil rng: err %v, want ErrConfig", err)
	}
}

// TestZeroAllocs checks Forward, Backward, ClipNorm and Adam.Step allocate
// nothing, at the benchmark size (blocks included).
func TestZeroAllocs(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 9))
	net, _ := New(&Config{Sizes: []int{136, 256, 256, 32}, MaxBatch: 256}, rng)
	opt := NewAdam(net.NumParams(), nil)
	x := randSlice(rng, 256*136)
	target := randSlice(rng, 256*32)
	dy := make([]float64, 256*32)
	dx := make([]float64, 256*136)
	allocs := testing.AllocsPerRun(3, func() {
		y := net.Forward(x, 256)
		MSE(dy, y, target, nil, 256)
		net.Backward(dx, dy)
		ClipNorm(net.Grad(), 1)
		opt.Step(net.Params(), net.Grad())
	})
	if allocs != 0 {
		t.Fatalf("%v allocs per update, want 0", allocs)
	}
}
