package skills

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/internal/vec"
)

// randBatch returns n rows of dense Gaussian observations and n skills from p.
func randBatch(rng *rand.Rand, n, in int, p Prior) (x, z []float64) {
	x = make([]float64, n*in)
	for i := range x {
		x[i] = rng.NormFloat64()
	}
	d := p.Dim()
	z = make([]float64, n*d)
	for i := range n {
		p.Sample(z[i*d:(i+1)*d], rng)
	}
	return x, z
}

// gradCheck compares the analytic gradient of the minibatch loss of d
// with central differences over every encoder parameter.
func gradCheck(t *testing.T, name string, d interface {
	Discriminator
	chunkLosser
}, c *core, x, z []float64) {
	t.Helper()
	n := len(x) / c.enc.inDim()
	zd := d.ZDim()
	_, g := c.lossGrad(d, x, z, n, zd)
	g = append([]float64(nil), g...)
	p := c.enc.params()
	var worst float64
	for i := range p {
		old := p[i]
		h := 1e-6 * math.Max(1, math.Abs(old))
		p[i] = old + h
		lp, _ := c.lossGrad(d, x, z, n, zd)
		p[i] = old - h
		lm, _ := c.lossGrad(d, x, z, n, zd)
		p[i] = old
		fd := (lp - lm) / (2 * h)
		// Central differences: truncation O(h^2) and rounding
		// O(eps |loss| / h) ~ 1e-10; 1e-7 absolute plus 1e-6 relative.
		err := math.Abs(fd - g[i])
		if err > 1e-7+1e-6*math.Abs(g[i]) {
			t.Errorf("%s: param %d: analytic %.10g, central difference %.10g", name, i, g[i], fd)
		}
		worst = max(worst, err)
	}
	t.Logf("%s: %d params, worst |analytic - difference| = %.2g", name, len(p), worst)
}

func TestGradientVMF(t *testing.T) {
	// Loss -kappa phi(x).z - log C_d(kappa) with phi = f/||f||; analytic
	// gradient against central finite differences (common practice).
	rng := rand.New(rand.NewPCG(1, 2))
	for _, tc := range []struct {
		name string
		net  NetConfig
	}{
		{"linear", NetConfig{}},
		{"tanh 6x5, chunks of 3", NetConfig{Hidden: []int{6, 5}, Tanh: true, MaxBatch: 3}},
	} {
		v, err := NewVMF(&VMFConfig{In: 5, Dim: 4, Net: tc.net, Kappa: 2.5}, rng)
		if err != nil {
			t.Fatal(err)
		}
		x, z := randBatch(rng, 7, 5, UniformSphere{D: 4})
		gradCheck(t, "vmf "+tc.name, v, &v.core, x, z)
	}
}

func TestGradientVMFKappa(t *testing.T) {
	// d loss / d log kappa = kappa (A_d(kappa) - mean phi.z) against
	// central differences in log kappa.
	rng := rand.New(rand.NewPCG(3, 2))
	for _, k0 := range []float64{0.2, 3, 45} {
		v, err := NewVMF(&VMFConfig{In: 3, Dim: 6, Kappa: k0, LearnKappa: true}, rng)
		if err != nil {
			t.Fatal(err)
		}
		x, z := randBatch(rng, 9, 3, UniformSphere{D: 6})
		v.csum = 0
		v.lossGrad(v, x, z, 9, 6)
		g := v.kappaGrad(9)
		rho := math.Log(k0)
		const h = 1e-6
		v.setKappa(math.Exp(rho + h))
		lp, _ := v.lossGrad(v, x, z, 9, 6)
		v.setKappa(math.Exp(rho - h))
		lm, _ := v.lossGrad(v, x, z, 9, 6)
		if fd := (lp - lm) / (2 * h); math.Abs(fd-g) > 1e-7+1e-6*math.Abs(g) {
			t.Errorf("kappa %g: analytic %.10g, central difference %.10g", k0, g, fd)
		}
	}
}

func TestGradientSoftmax(t *testing.T) {
	// Cross-entropy -sum_k z_k log softmax(l)_k, with one-hot and with
	// soft z rows; analytic gradient against central differences.
	rng := rand.New(rand.NewPCG(4, 2))
	for _, tc := range []struct {
		name string
		net  NetConfig
		soft bool
	}{
		{"linear", NetConfig{}, false},
		{"linear soft z", NetConfig{}, true},
		{"tanh 7, chunks of 4", NetConfig{Hidden: []int{7}, Tanh: true, MaxBatch: 4}, false},
	} {
		s, err := NewSoftmax(&SoftmaxConfig{In: 5, K: 4, Net: tc.net}, rng)
		if err != nil {
			t.Fatal(err)
		}
		x, z := randBatch(rng, 9, 5, Categorical{K: 4})
		if tc.soft {
			for i := range z {
				z[i] = rng.Float64()
			}
			for i := 0; i < len(z); i += 4 {
				sum := z[i] + z[i+1] + z[i+2] + z[i+3]
				for j := range 4 {
					z[i+j] /= sum
				}
			}
		}
		gradCheck(t, "softmax "+tc.name, s, &s.core, x, z)
	}
}

func TestSoftmaxPseudoReward(t *testing.T) {
	// Eysenbach et al. 2019 (Diversity is All You Need), eq. 3 and
	// Appendix A: the pseudo-reward log q(z|s) - log p(z) is 0 when the
	// discriminator cannot tell the skills apart and log K when it is
	// certain and right; ln 50 = 3.91202 for their 50 skills.
	const k = 50
	s, err := NewSoftmax(&SoftmaxConfig{In: k, K: k}, rand.New(rand.NewPCG(1, 1)))
	if err != nil {
		t.Fatal(err)
	}
	x := make([]float64, k)
	z := make([]float64, k)
	phi := make([]float64, k+1)
	w := make([]float64, k+1)
	p := Categorical{K: k}

	// Indistinguishable: all logits zero.
	clear(s.enc.params())
	for st := range k {
		OneHot(x, st)
		OneHot(z, (st*7+3)%k)
		if r := s.Reward(x, z); math.Abs(r) > 1e-14 {
			t.Errorf("uniform q: reward %g, want 0", r)
		}
		if r, want := s.LogProb(x, z), p.LogProb(z); math.Abs(r-want) > 1e-14 {
			t.Errorf("uniform q: log q = %g, want log p = %g", r, want)
		}
	}

	// Perfect: state i gives logit 100 to skill i, so q(i | i) = 1 - 49 e^-100.
	w0 := s.enc.params()[:k*k]
	for i := range k {
		w0[i*k+i] = 100
	}
	for st := range k {
		OneHot(x, st)
		OneHot(z, st)
		r := s.Reward(x, z)
		if math.Abs(r-3.91202) > 5e-6 || math.Abs(r-math.Log(k)) > 1e-13 {
			t.Errorf("perfect q: reward %.15g, want ln 50 = 3.91202", r)
		}
		// phi(x) . TaskVector(z) is the same reward.
		s.Features(phi, x)
		s.TaskVector(w, z)
		if pr := vec.DotSeq(phi, w); math.Abs(pr-r) > 1e-13 {
			t.Errorf("phi . w = %.15g, reward %.15g", pr, r)
		}
		if phi[k] != math.Log(k) || w[k] != 1 {
			t.Errorf("constant feature %g and weight %g, want log K and 1", phi[k], w[k])
		}
		if got := s.Predict(x); got != st {
			t.Errorf("Predict(state %d) = %d", st, got)
		}
	}
}

func TestVMFReward(t *testing.T) {
	// The vMF reward is phi(x) . z with phi = f/||f||, and the task vector
	// is z itself; log q = kappa phi.z + log C_d(kappa). With a linear f on
	// one-hot x, f(e_s) = W_s + b (definition).
	v, err := NewVMF(&VMFConfig{In: 3, Dim: 3, Kappa: 4}, rand.New(rand.NewPCG(1, 1)))
	if err != nil {
		t.Fatal(err)
	}
	p := v.enc.params()
	clear(p)
	copy(p[3:6], []float64{0, 3, 4}) // state 1 -> f = (0, 3, 4), phi = (0, .6, .8)
	x := []float64{0, 1, 0}
	z := []float64{0, 0.6, 0.8}
	if r := v.Reward(x, z); math.Abs(r-1) > 1e-15 {
		t.Errorf("reward %g, want 1", r)
	}
	z2 := []float64{1, 0, 0}
	if r := v.Reward(x, z2); math.Abs(r) > 1e-15 {
		t.Errorf("reward %g, want 0", r)
	}
	if lp, want := v.LogProb(x, z), 4+VMFLogNorm(3, 4); math.Abs(lp-want) > 1e-14 {
		t.Errorf("log q = %g, want %g", lp, want)
	}
	// f = 0 (state 0): phi = 0, q uniform on the sphere.
	x0 := []float64{1, 0, 0}
	if lp, want := v.LogProb(x0, z), VMFLogNorm(3, 4); lp != want {
		t.Errorf("zero f: log q = %g, want log C = %g", lp, want)
	}
	w := make([]float64, 3)
	v.TaskVector(w, z)
	if w[0] != z[0] || w[1] != z[1] || w[2] != z[2] {
		t.Errorf("task vector %v, want %v", w, z)
	}
}

func TestUpdateDiverged(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	s, _ := NewSoftmax(&SoftmaxConfig{In: 2, K: 3}, rng)
	v, _ := NewVMF(&VMFConfig{In: 2, Dim: 3}, rng)
	for _, tc := range []struct {
		d Discriminator
		p []float64
		z []float64
	}{
		{s, s.enc.params(), []float64{0, 1, 0}},
		{v, v.enc.params(), []float64{0, 1, 0}},
	} {
		before := append([]float64(nil), tc.p...)
		if _, err := tc.d.Update([]float64{1, 0}, tc.z); err != nil {
			t.Fatal(err)
		}
		copy(before, tc.p)
		_, err := tc.d.Update([]float64{math.Inf(1), 0}, tc.z)
		var de *DivergenceError
		if !errors.Is(err, ErrDiverged) || !errors.As(err, &de) || de.Step != 2 {
			t.Errorf("%T: error %v, want divergence at step 2", tc.d, err)
		}
		for i := range before {
			if math.Float64bits(before[i]) != math.Float64bits(tc.p[i]) {
				t.Fatalf("%T: weights changed by a diverged update", tc.d)
			}
		}
	}
}

func TestConfigErrors(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	for _, c := range []*VMFConfig{
		nil,
		{In: 0, Dim: 3},
		{In: 2, Dim: 1},
		{In: 2, Dim: 3, Kappa: -1},
		{In: 2, Dim: 3, Kappa: math.Inf(1)},
		{In: 2, Dim: 3, Kappa: 2000, LearnKappa: true},
		{In: 2, Dim: 3, MaxKappa: -1},
		{In: 2, Dim: 3, Optim: OptimConfig{StepSize: -1}},
		{In: 2, Dim: 3, Optim: OptimConfig{Beta1: 1}},
		{In: 2, Dim: 3, Optim: OptimConfig{ClipNorm: math.NaN()}},
		{In: 2, Dim: 3, Net: NetConfig{Hidden: []int{0}}},
		{In: 2, Dim: 3, Net: NetConfig{Hidden: []int{4}, MaxBatch: -1}},
	} {
		if _, err := NewVMF(c, rng); !errors.Is(err, ErrConfig) {
			t.Errorf("NewVMF(%+v): error %v, want ErrConfig", c, err)
		}
	}
	if _, err := NewVMF(&VMFConfig{In: 2, Dim: 3}, nil); !errors.Is(err, ErrConfig) {
		t.Errorf("nil rng: %v", err)
	}
	for _, c := range []*SoftmaxConfig{nil, {In: 2, K: 1}, {In: 0, K: 3}, {In: 2, K: 3, Optim: OptimConfig{Eps: -1}}} {
		if _, err := NewSoftmax(c, rng); !errors.Is(err, ErrConfig) {
			t.Errorf("NewSoftmax(%+v): error %v, want ErrConfig", c, err)
		}
	}
}

func TestUpdateLengthPanics(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	s, _ := NewSoftmax(&SoftmaxConfig{In: 2, K: 3}, rng)
	v, _ := NewVMF(&VMFConfig{In: 2, Dim: 3}, rng)
	for _, d := range []Discriminator{s, v} {
		for _, args := range [][2][]float64{
			{nil, nil},
			{{1, 0, 1}, {1, 0, 0}},
			{{1, 0}, {1, 0}},
		} {
			func() {
				defer func() {
					if recover() == nil {
						t.Errorf("%T.Update(%v, %v) did not panic", d, args[0], args[1])
					}
				}()
				d.Update(args[0], args[1])
			}()
		}
	}
}

func TestVMFZeroDirection(t *testing.T) {
	// f(x) = 0: phi = 0 (q uniform), the loss is -log C_d(kappa), and an
	// update moves f towards z (documented subgradient -kappa z / n).
	v, _ := NewVMF(&VMFConfig{In: 2, Dim: 3, Kappa: 2, Optim: OptimConfig{StepSize: 0.01}}, rand.New(rand.NewPCG(1, 1)))
	clear(v.enc.params())
	x := []float64{1, 0}
	z := []float64{0, 0, 1}
	loss, err := v.Update(x, z)
	if err != nil || loss != -VMFLogNorm(3, 2) {
		t.Fatalf("loss %g, err %v; want %g", loss, err, -VMFLogNorm(3, 2))
	}
	if r := v.Reward(x, z); !(r > 0.99) {
		t.Errorf("after one step from f = 0, phi . z = %g, want ~1", r)
	}
}
