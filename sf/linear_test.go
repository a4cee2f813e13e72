package sf

import (
	"errors"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/mdp"
)

// TestLinearOneHot checks that with one-hot observations x(s) = e_s the
// semi-gradient update is the tabular update (derived by hand: W_a e_s is
// column s of W_a and the gradient touches only that column), for every
// target, with a constant step.
func TestLinearOneHot(t *testing.T) {
	const n, na, d, gamma = 5, 2, 3, 0.9
	phi, _ := NewRandom(n, d, false, rand.New(rand.NewPCG(3, 3)))
	pi := mdp.RandomPolicy(randomMDP(t, 2, &mdp.RandomConfig{States: n, Actions: na}), rand.New(rand.NewPCG(4, 4)))
	onehot := func(dst []float64, s int) { clear(dst); dst[s] = 1 }
	state := func(x []float64) int {
		for s, v := range x {
			if v == 1 {
				return s
			}
		}
		panic("not one-hot")
	}
	w := []float64{1, -1, 0.5}
	for _, target := range []Target{Sampled, Expected, Greedy} {
		tb, _ := NewTable(n, na, d)
		td, err := NewTD(tb, phi, gamma, &TDConfig{Target: target, Policy: pi, Task: w})
		if err != nil {
			t.Fatal(err)
		}
		lin, _ := NewLinear(na, d, n)
		lt, err := NewLinearTD(lin, gamma, &LinearTDConfig{Target: target, Task: w,
			Policy: func(dst, x []float64) { pi.Probs(dst, state(x)) }})
		if err != nil {
			t.Fatal(err)
		}
		rng := rand.New(rand.NewPCG(5, 5))
		x, x2, f := make([]float64, n), make([]float64, n), make([]float64, d)
		for k := 0; k < 3000; k++ {
			s, a, s2, a2, term := rng.IntN(n), rng.IntN(na), rng.IntN(n), rng.IntN(na), rng.IntN(9) == 0
			td.Update(s, a, s2, term, a2)
			onehot(x, s)
			onehot(x2, s2)
			phi.Features(f, s, a, s2)
			if err := lt.Update(x, a, f, x2, term, a2); err != nil {
				t.Fatal(err)
			}
		}
		src := NewLinearSource(lin, onehot)
		psi := make([]float64, na*d)
		for s := 0; s < n; s++ {
			src.Psi(psi, s)
			if diff, sc := maxAbsDiff(psi, tb.State(s)); diff > 1e-12*(1+sc) {
				t.Errorf("%v: state %d: linear %v, table %v", target, s, psi, tb.State(s))
			}
		}
		if a, dd := src.Shape(); a != na || dd != d {
			t.Errorf("Shape = (%d, %d)", a, dd)
		}
	}
}

// TestLinearRotated checks convergence to Exact with orthonormal
// observations x(s) = column s of a random orthogonal matrix (a rotated
// table, so the fixed point is exact psi; derived by hand as above) on the
// Sutton & Barto Example 6.2 random walk, gamma = 1, Expected target. Moves
// are deterministic and the target is an expectation, so the updates carry
// no noise and a constant step converges; tolerance 1e-6 (iterative tier).
func TestLinearRotated(t *testing.T) {
	m := randomWalk(t)
	pi := mdp.Uniform{N: 2}
	phi := OneHotState{N: 7}
	ex, err := Exact(m, pi, phi, 1)
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(8, 8))
	g := mat.NewDense(7, 7, nil)
	for i := 0; i < 7; i++ {
		for j := 0; j < 7; j++ {
			g.Set(i, j, rng.NormFloat64())
		}
	}
	var qr mat.QR
	qr.Factorize(g)
	var q mat.Dense
	qr.QTo(&q)
	obs := func(dst []float64, s int) { mat.Col(dst, s, &q) }
	lin, _ := NewLinear(2, 7, 7)
	lt, err := NewLinearTD(lin, 1, &LinearTDConfig{Target: Expected, Schedule: StepSchedule{StepSize: 0.5},
		Policy: func(dst, x []float64) { dst[0], dst[1] = 0.5, 0.5 }})
	if err != nil {
		t.Fatal(err)
	}
	x, x2, f := make([]float64, 7), make([]float64, 7), make([]float64, 7)
	for k := 0; k < 20000; k++ {
		s, a := 1+rng.IntN(5), rng.IntN(2)
		s2 := s - 1 + 2*a
		obs(x, s)
		obs(x2, s2)
		phi.Features(f, s, a, s2)
		if err := lt.Update(x, a, f, x2, m.Terminal(s2), 0); err != nil {
			t.Fatal(err)
		}
	}
	src := NewLinearSource(lin, obs)
	psi := make([]float64, 14)
	for s := 1; s <= 5; s++ {
		src.Psi(psi, s)
		if diff, _ := maxAbsDiff(psi, ex.State(s)); diff > 1e-6 {
			t.Errorf("state %d: max error %g", s, diff)
		}
	}
	if n := testing.AllocsPerRun(100, func() { src.Psi(psi, 3) }); n != 0 {
		t.Errorf("LinearSource.Psi allocates %v times", n)
	}
}

// TestLinearDivergence: phi = 1e308, x = (1), self-loop, alpha = 1,
// gamma = 1: update 1 sets W = 1e308; at update 2 the target
// 1e308 + 1e308 overflows (derived by hand).
func TestLinearDivergence(t *testing.T) {
	lin, _ := NewLinear(1, 1, 1)
	lt, _ := NewLinearTD(lin, 1, &LinearTDConfig{Schedule: StepSchedule{StepSize: 1}})
	x, f := []float64{1}, []float64{1e308}
	if err := lt.Update(x, 0, f, x, false, 0); err != nil {
		t.Fatal(err)
	}
	err := lt.Update(x, 0, f, x, false, 0)
	var de *DivergenceError
	if !errors.As(err, &de) || de.Step != 2 || !errors.Is(lt.Err(), ErrDiverged) {
		t.Fatalf("err = %v, want divergence at step 2", err)
	}
	if err := lt.Update(x, 0, f, x, false, 0); err != de || lt.Steps() != 2 {
		t.Errorf("after divergence: err %v, steps %d", err, lt.Steps())
	}
}

func TestLinearAllocsAndErrors(t *testing.T) {
	if _, err := NewLinear(0, 1, 1); !errors.Is(err, ErrDimension) {
		t.Errorf("NewLinear(0,1,1): err = %v", err)
	}
	lin, _ := NewLinear(3, 4, 6)
	if _, err := NewLinearTD(lin, 0.9, &LinearTDConfig{Target: Expected}); !errors.Is(err, ErrConfig) {
		t.Errorf("no policy: err = %v", err)
	}
	if _, err := NewLinearTD(lin, 0.9, &LinearTDConfig{Target: Greedy, Task: []float64{1}}); !errors.Is(err, ErrDimension) {
		t.Errorf("task length: err = %v", err)
	}
	if _, err := NewLinearTD(lin, -1, nil); !errors.Is(err, ErrDiscount) {
		t.Errorf("gamma: err = %v", err)
	}
	x, x2, f := make([]float64, 6), make([]float64, 6), make([]float64, 4)
	for i := range x {
		x[i], x2[i] = float64(i)/6, 1-float64(i)/6
	}
	for _, target := range []Target{Sampled, Expected, Greedy} {
		lt, err := NewLinearTD(lin, 0.9, &LinearTDConfig{Target: target, Task: []float64{1, 0, 0, 1},
			Policy: func(dst, x []float64) { dst[0], dst[1], dst[2] = 0.2, 0.3, 0.5 }, Schedule: StepSchedule{Power: 0.7}})
		if err != nil {
			t.Fatal(err)
		}
		if n := testing.AllocsPerRun(100, func() {
			lt.Update(x, 1, f, x2, false, 2)
			lt.Update(x2, 0, f, nil, true, 0)
		}); n != 0 {
			t.Errorf("%v: %v allocs per update", target, n)
		}
	}
}
