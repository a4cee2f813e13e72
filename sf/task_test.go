package sf

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/internal/vec"
	"github.com/successor-go/successor/linalg"
)

func randomDesign(rng *rand.Rand, n, d int) *mat.Dense {
	x := mat.NewDense(n, d, nil)
	for i := 0; i < n; i++ {
		for j := 0; j < d; j++ {
			x.Set(i, j, rng.NormFloat64())
		}
	}
	return x
}

// TestInferTaskExact: noise-free rewards r = phi . w with full-rank phi and
// lambda = 0 recover w to 1e-9 (least squares is exact on consistent data),
// with RSS ~ 0; with Unit set the result is w / ||w||.
func TestInferTaskExact(t *testing.T) {
	for seed := uint64(1); seed <= 5; seed++ {
		rng := rand.New(rand.NewPCG(seed, 1))
		n, d := 20+int(seed)*7, 2+int(seed)
		x := randomDesign(rng, n, d)
		w := make([]float64, d)
		for k := range w {
			w[k] = rng.Float64()*4 - 2
		}
		r := make([]float64, n)
		for i := range r {
			r[i] = vec.Dot(x.RawRowView(i), w)
		}
		got := make([]float64, d)
		fit, err := InferTask(got, x, r, 0, nil)
		if err != nil {
			t.Fatal(err)
		}
		if diff, _ := maxAbsDiff(got, w); diff > 1e-9 {
			t.Errorf("seed %d: |w - w_true| = %g", seed, diff)
		}
		if fit.RSS > 1e-18*float64(n) || fit.Samples != n || math.Abs(fit.Norm-math.Sqrt(vec.Dot(w, w))) > 1e-9 {
			t.Errorf("seed %d: fit %+v", seed, fit)
		}
		if _, err := InferTask(got, x, r, 0, &TaskConfig{Unit: true}); err != nil {
			t.Fatal(err)
		}
		nw := math.Sqrt(vec.Dot(w, w))
		for k := range w {
			if math.Abs(got[k]-w[k]/nw) > 1e-9 {
				t.Fatalf("seed %d: unit w = %v, want %v / %v", seed, got, w, nw)
			}
		}
	}
}

// TestInferTaskNoisy: with r = phi . w + e, e ~ N(0, sigma^2), least squares
// is unbiased with covariance sigma^2 (X^T X)^-1 (Gauss-Markov); the error
// must be below 5 standard deviations of its norm, sqrt(sigma^2 tr((X^T
// X)^-1)), and RSS / (n - d) must estimate sigma^2 within 15% (its relative
// standard deviation is sqrt(2 / (n - d)) ~ 3% here; from memory, standard
// regression theory).
func TestInferTaskNoisy(t *testing.T) {
	const n, d, sigma = 2000, 5, 0.1
	for seed := uint64(1); seed <= 3; seed++ {
		rng := rand.New(rand.NewPCG(seed, 2))
		x := randomDesign(rng, n, d)
		w := []float64{1, -0.5, 0.25, 2, 0}
		r := make([]float64, n)
		for i := range r {
			r[i] = vec.Dot(x.RawRowView(i), w) + sigma*rng.NormFloat64()
		}
		got := make([]float64, d)
		fit, err := InferTask(got, x, r, 0, nil)
		if err != nil {
			t.Fatal(err)
		}
		var xtx, inv mat.Dense
		xtx.Mul(x.T(), x)
		if err := inv.Inverse(&xtx); err != nil { // 5x5 covariance for the bound only
			t.Fatal(err)
		}
		bound := 5 * sigma * math.Sqrt(mat.Trace(&inv))
		var e2 float64
		for k := range w {
			e2 += (got[k] - w[k]) * (got[k] - w[k])
		}
		if math.Sqrt(e2) > bound {
			t.Errorf("seed %d: |w - w_true| = %g > %g", seed, math.Sqrt(e2), bound)
		}
		if s2 := fit.RSS / (n - d); math.Abs(s2/(sigma*sigma)-1) > 0.15 {
			t.Errorf("seed %d: RSS/(n-d) = %g, want about %g", seed, s2, sigma*sigma)
		}
	}
}

// TestTaskEstimatorMatchesBatch: after the same samples, recursive least
// squares gives the batch ridge answer (Haykin, Adaptive Filter Theory,
// ch. 10: RLS with P_0 = I/lambda is exact ridge), weights to 1e-9 relative
// and the same RSS.
func TestTaskEstimatorMatchesBatch(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 9))
	const n, d, lambda = 300, 6, 0.5
	x := randomDesign(rng, n, d)
	r := make([]float64, n)
	for i := range r {
		r[i] = rng.NormFloat64() + x.At(i, 0)
	}
	est, err := NewTaskEstimator(d, lambda, nil)
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i < n; i++ {
		if err := est.Observe(x.RawRowView(i), r[i]); err != nil {
			t.Fatal(err)
		}
	}
	online := make([]float64, d)
	if err := est.Task(online); err != nil {
		t.Fatal(err)
	}
	batch := make([]float64, d)
	fit, err := InferTask(batch, x, r, lambda, nil)
	if err != nil {
		t.Fatal(err)
	}
	if diff, sc := maxAbsDiff(online, batch); diff > 1e-9*(1+sc) {
		t.Errorf("online %v, batch %v", online, batch)
	}
	of := est.Fit()
	if of.Samples != n || math.Abs(of.RSS-fit.RSS) > 1e-9*fit.RSS {
		t.Errorf("online fit %+v, batch fit %+v", of, fit)
	}
	phi := x.RawRowView(0)
	if a := testing.AllocsPerRun(100, func() { est.Observe(phi, 1); est.Task(online) }); a != 0 {
		t.Errorf("Observe/Task allocate %v times", a)
	}
}

func TestTaskErrors(t *testing.T) {
	x := mat.NewDense(3, 2, []float64{1, 0, 0, 1, 1, 1})
	dst := make([]float64, 2)
	for _, tc := range []struct {
		name   string
		dst    []float64
		r      []float64
		lambda float64
		set    *TaskConfig
		want   error
	}{
		{"dst length", make([]float64, 3), []float64{1, 2, 3}, 0, nil, ErrDimension},
		{"rewards length", dst, []float64{1, 2}, 0, nil, ErrDimension},
		{"negative lambda", dst, []float64{1, 2, 3}, -1, nil, ErrConfig},
		{"zero vector", dst, []float64{0, 0, 0}, 0, &TaskConfig{Unit: true}, ErrZeroVector},
		{"non-finite", dst, []float64{0, math.NaN(), 0}, 0, nil, ErrNonFinite},
	} {
		if _, err := InferTask(tc.dst, x, tc.r, tc.lambda, tc.set); !errors.Is(err, tc.want) {
			t.Errorf("%s: err = %v, want %v", tc.name, err, tc.want)
		}
	}
	rank := mat.NewDense(3, 2, []float64{1, 2, 2, 4, 3, 6})
	if _, err := InferTask(dst, rank, []float64{1, 2, 3}, 0, nil); !errors.Is(err, linalg.ErrSingular) {
		t.Errorf("rank deficient: err = %v", err)
	}
	est, _ := NewTaskEstimator(2, 1, &TaskConfig{Unit: true})
	if err := est.Task(dst); !errors.Is(err, ErrZeroVector) {
		t.Errorf("estimator before data: err = %v", err)
	}
	if err := est.Observe([]float64{1, math.Inf(1)}, 0); !errors.Is(err, ErrNonFinite) {
		t.Errorf("estimator non-finite: err = %v", err)
	}
	if _, err := NewTaskEstimator(2, 0, nil); !errors.Is(err, ErrConfig) {
		t.Errorf("estimator lambda 0: err = %v", err)
	}
}
