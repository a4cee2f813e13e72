package linalg_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/linalg"
)

// TestRidgeExactRecovery: noise-free data y = X w recover w (to 1e-9) with
// lambda = 0, and the residual is ~0.
func TestRidgeExactRecovery(t *testing.T) {
	for seed := uint64(0); seed < 20; seed++ {
		rnd := rand.New(rand.NewPCG(seed, 21))
		d := 1 + rnd.IntN(8)
		m := d + rnd.IntN(30)
		x := randDense(m, d, rnd)
		w := mat.NewVecDense(d, randVec(d, rnd))
		var y mat.VecDense
		y.MulVec(x, w)
		var got mat.VecDense
		res, err := linalg.Ridge(&got, x, &y, 0)
		if err != nil {
			t.Fatalf("seed %d: %v", seed, err)
		}
		if !mat.EqualApprox(&got, w, 1e-9) || res > 1e-18*float64(m) {
			t.Errorf("seed %d: w = %v, want %v, residual %v", seed, mat.Formatted(got.T()), mat.Formatted(w.T()), res)
		}
	}
}

// TestRidgeAgainstGonum compares with gonum on random noisy data: for
// lambda = 0 with mat.Dense.Solve (QR least squares for a tall matrix),
// for lambda > 0 with the normal equations (X^T X + lambda I) w = X^T y
// solved by gonum's Cholesky.
func TestRidgeAgainstGonum(t *testing.T) {
	for seed := uint64(0); seed < 30; seed++ {
		rnd := rand.New(rand.NewPCG(seed, 22))
		d := 1 + rnd.IntN(6)
		m := d + 1 + rnd.IntN(40)
		x := randDense(m, d, rnd)
		y := mat.NewVecDense(m, randVec(m, rnd))
		lambda := []float64{0, 1e-3, 0.5, 10}[seed%4]
		var got mat.VecDense
		res, err := linalg.Ridge(&got, x, y, lambda)
		if err != nil {
			t.Fatalf("seed %d: %v", seed, err)
		}
		var want mat.VecDense
		if lambda == 0 {
			var w mat.Dense
			if err := w.Solve(x, y); err != nil {
				t.Fatal(err)
			}
			want.CloneFromVec(w.ColView(0))
		} else {
			var g mat.SymDense
			g.SymOuterK(1, x.T())
			for k := 0; k < d; k++ {
				g.SetSym(k, k, g.At(k, k)+lambda)
			}
			var ch mat.Cholesky
			if !ch.Factorize(&g) {
				t.Fatal("cholesky failed")
			}
			var xty mat.VecDense
			xty.MulVec(x.T(), y)
			if err := ch.SolveVecTo(&want, &xty); err != nil {
				t.Fatal(err)
			}
		}
		if !mat.EqualApprox(&got, &want, 1e-10) {
			t.Errorf("seed %d lambda %v: w = %v, gonum %v", seed, lambda, mat.Formatted(got.T()), mat.Formatted(want.T()))
		}
		var r mat.VecDense
		r.MulVec(x, &got)
		r.SubVec(&r, y)
		if rss := mat.Dot(&r, &r); math.Abs(rss-res) > 1e-10*rss {
			t.Errorf("seed %d: residual %v, want %v", seed, res, rss)
		}
	}
}

func TestRidgeErrors(t *testing.T) {
	x := mat.NewDense(3, 2, []float64{1, 2, 2, 4, 3, 6}) // column 2 = 2 column 1
	y := mat.NewVecDense(3, []float64{1, 2, 3})
	cases := []struct {
		name   string
		dst    *mat.VecDense
		x      mat.Matrix
		y      mat.Vector
		lambda float64
		want   error
	}{
		{"rank deficient", &mat.VecDense{}, x, y, 0, linalg.ErrSingular},
		{"rank deficient typed", &mat.VecDense{}, x, y, 0, linalg.ErrRankDeficient},
		{"too few samples", &mat.VecDense{}, mat.NewDense(1, 2, []float64{1, 1}), mat.NewVecDense(1, []float64{1}), 0, linalg.ErrRankDeficient},
		{"negative lambda", &mat.VecDense{}, x, y, -1, linalg.ErrConfig},
		{"NaN lambda", &mat.VecDense{}, x, y, math.NaN(), linalg.ErrConfig},
		{"y length", &mat.VecDense{}, x, mat.NewVecDense(2, nil), 0.1, linalg.ErrDimension},
		{"dst length", mat.NewVecDense(3, nil), x, y, 0.1, linalg.ErrDimension},
		{"NaN in x", &mat.VecDense{}, mat.NewDense(1, 1, []float64{math.NaN()}), mat.NewVecDense(1, []float64{1}), 1, linalg.ErrNonFinite},
		{"Inf in y", &mat.VecDense{}, mat.NewDense(1, 1, []float64{1}), mat.NewVecDense(1, []float64{math.Inf(1)}), 1, linalg.ErrNonFinite},
	}
	for _, c := range cases {
		if _, err := linalg.Ridge(c.dst, c.x, c.y, c.lambda); !errors.Is(err, c.want) {
			t.Errorf("%s: got %v, want %v", c.name, err, c.want)
		}
	}
	// With lambda > 0 the same rank-deficient X is fine.
	var w mat.VecDense
	if _, err := linalg.Ridge(&w, x, y, 0.1); err != nil {
		t.Errorf("ridge with lambda > 0 on rank-deficient X: %v", err)
	}
}

// TestRLSEqualsRidge: after the same samples, RLS with P0 = I/lambda equals
// batch ridge with the same lambda (the Sherman-Morrison recursion is exact;
// Haykin, Adaptive Filter Theory, ch. 10), and its RSS is Ridge's residual.
func TestRLSEqualsRidge(t *testing.T) {
	for seed := uint64(0); seed < 20; seed++ {
		rnd := rand.New(rand.NewPCG(seed, 23))
		d := 1 + rnd.IntN(8)
		m := 1 + rnd.IntN(50)
		lambda := []float64{1e-2, 0.1, 1, 5}[seed%4]
		x := randDense(m, d, rnd)
		y := mat.NewVecDense(m, randVec(m, rnd))
		r, err := linalg.NewRLS(d, lambda)
		if err != nil {
			t.Fatal(err)
		}
		for i := 0; i < m; i++ {
			if err := r.Update(x.RawRowView(i), y.AtVec(i)); err != nil {
				t.Fatal(err)
			}
		}
		var want mat.VecDense
		rss, err := linalg.Ridge(&want, x, y, lambda)
		if err != nil {
			t.Fatal(err)
		}
		got := mat.NewVecDense(d, r.WeightsTo(nil))
		if !mat.EqualApprox(got, &want, 1e-9) {
			t.Errorf("seed %d: rls %v, ridge %v", seed, mat.Formatted(got.T()), mat.Formatted(want.T()))
		}
		if math.Abs(r.RSS()-rss) > 1e-8*(1+rss) {
			t.Errorf("seed %d: rls RSS %v, ridge %v", seed, r.RSS(), rss)
		}
		if r.Count() != m || r.Dim() != d || r.Lambda() != lambda {
			t.Errorf("seed %d: count %d dim %d lambda %v", seed, r.Count(), r.Dim(), r.Lambda())
		}
		wantCost := rss + lambda*mat.Dot(&want, &want)
		if math.Abs(r.Cost()-wantCost) > 1e-8*(1+wantCost) {
			t.Errorf("seed %d: cost %v, want %v", seed, r.Cost(), wantCost)
		}
		r.Reset()
		if r.Count() != 0 || r.Cost() != 0 || norm2(r.Weights()) != 0 {
			t.Errorf("seed %d: Reset left state", seed)
		}
	}
}

func TestRLSErrorsAndPanics(t *testing.T) {
	for _, c := range []struct {
		d      int
		lambda float64
		want   error
	}{
		{0, 1, linalg.ErrDimension},
		{2, 0, linalg.ErrConfig},
		{2, -1, linalg.ErrConfig},
		{2, math.Inf(1), linalg.ErrConfig},
		{2, math.NaN(), linalg.ErrConfig},
		{2, 1e-320, linalg.ErrConfig}, // 1/lambda overflows (used to give P_0 = Inf)
	} {
		if _, err := linalg.NewRLS(c.d, c.lambda); !errors.Is(err, c.want) {
			t.Errorf("NewRLS(%d, %v): got %v, want %v", c.d, c.lambda, err, c.want)
		}
	}
	r, _ := linalg.NewRLS(2, 1)
	for name, f := range map[string]func(){
		"short x":     func() { r.Update([]float64{1}, 1) },
		"WeightsTo 3": func() { r.WeightsTo(make([]float64, 3)) },
	} {
		func() {
			defer func() {
				if recover() == nil {
					t.Errorf("%s: no panic", name)
				}
			}()
			f()
		}()
	}
}

// TestRLSNonFinite checks that a sample that is not finite, or whose
// update overflows although it is finite, is an error wrapping
// ErrNonFinite and leaves the estimator as it was (it used to panic).
func TestRLSNonFinite(t *testing.T) {
	for _, c := range []struct {
		name   string
		lambda float64
		x      []float64
		y      float64
	}{
		{"NaN y", 1, []float64{1, 2}, math.NaN()},
		{"Inf x", 1, []float64{math.Inf(1), 2}, 1},
		{"Inf and -Inf x", 1, []float64{math.Inf(1), math.Inf(-1)}, 0},
		// Finite inputs whose sum is 0 (so a guard on sum(x) + y
		// passes) but x'Px = 2e400/lambda overflows.
		{"1e200 features", 1, []float64{1e200, -1e200}, 0},
		// x'Px is finite; the residual 1e300 squared overflows the cost.
		{"1e300 reward", 1, []float64{1, 0}, 1e300},
	} {
		t.Run(c.name, func(t *testing.T) {
			r, err := linalg.NewRLS(2, c.lambda)
			if err != nil {
				t.Fatal(err)
			}
			if err := r.Update([]float64{0.5, 0.25}, 1); err != nil {
				t.Fatal(err)
			}
			w0, p0 := append([]float64(nil), r.Weights()...), r.Cost()
			if err := r.Update(c.x, c.y); !errors.Is(err, linalg.ErrNonFinite) {
				t.Fatalf("error %v, want ErrNonFinite", err)
			}
			if r.Count() != 1 || r.Cost() != p0 || r.Weights()[0] != w0[0] || r.Weights()[1] != w0[1] {
				t.Errorf("refused sample changed the estimator: count %d, w %v (was %v), cost %v (was %v)",
					r.Count(), r.Weights(), w0, r.Cost(), p0)
			}
			for _, v := range r.Weights() {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					t.Errorf("weights %v not finite", r.Weights())
				}
			}
		})
	}
}

func TestRLSUpdateAllocs(t *testing.T) {
	r, _ := linalg.NewRLS(16, 1)
	x := randVec(16, rand.New(rand.NewPCG(1, 2)))
	if a := testing.AllocsPerRun(100, func() { r.Update(x, 0.5) }); a != 0 {
		t.Errorf("Update allocates %v times", a)
	}
}

// TestRLSDimBound checks that a dimension whose d x d matrix would not fit
// is an error (NewRLS(2^40) used to ask for 2^80 values and die).
func TestRLSDimBound(t *testing.T) {
	for _, d := range []int{linalg.MaxRLSDim + 1, 1 << 40, math.MaxInt} {
		if _, err := linalg.NewRLS(d, 1); !errors.Is(err, linalg.ErrDimension) {
			t.Errorf("NewRLS(%d): error %v, want ErrDimension", d, err)
		}
	}
}
