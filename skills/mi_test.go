package skills

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"
)

// fixedDisc is a stand-in discriminator whose log q(z | x) is x[0] (the
// observation carries the value), for checking estimators by hand.
type fixedDisc struct{}

func (fixedDisc) InDim() int                     { return 1 }
func (fixedDisc) ZDim() int                      { return 3 }
func (fixedDisc) FeatureDim() int                { return 1 }
func (fixedDisc) Features(dst, x []float64)      { dst[0] = x[0] }
func (fixedDisc) LogProb(x, z []float64) float64 { return x[0] }
func (fixedDisc) Reward(x, z []float64) float64  { return x[0] }
func (fixedDisc) TaskVector(dst, z []float64)    { dst[0] = 1 }
func (fixedDisc) Update(x, z []float64) (float64, error) {
	return 0, nil
}

func TestEstimateMIByHand(t *testing.T) {
	// Summands log q - log p = v_i + log 3 for v = (-1, -0.5, -2, -0.25):
	// mean = -0.9375 + log 3; sample variance (divisor 3) of v is
	// ((0.0625)^2 + (0.4375)^2 + (1.0625)^2 + (0.6875)^2)/3 = 0.6822916...,
	// so the standard error is sqrt(0.6822916/4) (derived by hand).
	v := []float64{-1, -0.5, -2, -0.25}
	z := make([]float64, 3*len(v))
	for i := range v {
		z[3*i+i%3] = 1
	}
	e, err := EstimateMI(fixedDisc{}, Categorical{K: 3}, v, z)
	if err != nil {
		t.Fatal(err)
	}
	if want := -0.9375 + math.Log(3); math.Abs(e.Bound-want) > 1e-15 {
		t.Errorf("bound %.17g, want %.17g", e.Bound, want)
	}
	varV := (0.0625*0.0625 + 0.4375*0.4375 + 1.0625*1.0625 + 0.6875*0.6875) / 3
	if want := math.Sqrt(varV / 4); math.Abs(e.StdErr-want) > 1e-15 {
		t.Errorf("std err %.17g, want %.17g", e.StdErr, want)
	}
	if e.N != 4 || !math.IsNaN(e.Accuracy) {
		t.Errorf("N = %d, accuracy %g; want 4 and NaN (not a classifier)", e.N, e.Accuracy)
	}

	one, err := EstimateMI(fixedDisc{}, Categorical{K: 3}, v[:1], z[:3])
	if err != nil || !math.IsInf(one.StdErr, 1) {
		t.Errorf("one pair: %+v, %v; want StdErr +Inf", one, err)
	}
	if _, err := EstimateMI(fixedDisc{}, Categorical{K: 3}, v, z[:6]); !errors.Is(err, ErrDimension) {
		t.Errorf("short z: %v, want ErrDimension", err)
	}
	var m MIMeter
	if _, err := m.Estimate(); !errors.Is(err, ErrEmpty) {
		t.Errorf("empty meter: %v, want ErrEmpty", err)
	}
	m.Add(fixedDisc{}, Categorical{K: 3}, []float64{0}, []float64{0.5, 0.5, 0}) // not in the prior's support
	if _, err := m.Estimate(); !errors.Is(err, ErrNonFinite) {
		t.Errorf("z outside the prior: %v, want ErrNonFinite", err)
	}
}

func TestEstimateMISoftmax(t *testing.T) {
	// A perfect categorical discriminator over K = 50 one-hot skills: the
	// bound is log 50 with zero spread, accuracy 1 (Eysenbach et al. 2019,
	// Appendix A: log 50 is the largest achievable pseudo-reward). A
	// uniform one: bound 0, accuracy the share of skill 0 (ties pick 0).
	const k = 50
	s, _ := NewSoftmax(&SoftmaxConfig{In: k, K: k}, rand.New(rand.NewPCG(1, 1)))
	p := s.enc.params()
	clear(p)
	x, z := make([]float64, 2*k*k), make([]float64, 2*k*k)
	for i := range 2 * k {
		OneHot(x[i*k:(i+1)*k], i%k)
		OneHot(z[i*k:(i+1)*k], i%k)
	}
	e, err := EstimateMI(s, Categorical{K: k}, x, z)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(e.Bound) > 1e-14 || e.Accuracy != 2.0/(2*k) {
		t.Errorf("uniform: bound %g, accuracy %g; want 0 and %g", e.Bound, e.Accuracy, 1.0/k)
	}
	for i := range k {
		p[i*k+i] = 100
	}
	e, err = EstimateMI(s, Categorical{K: k}, x, z)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(e.Bound-math.Log(k)) > 1e-13 || e.StdErr > 1e-13 || e.Accuracy != 1 {
		t.Errorf("perfect: %+v; want bound ln 50 = 3.91202, std err 0, accuracy 1", e)
	}
}
