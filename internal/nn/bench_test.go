package nn

import (
	"fmt"
	"math/rand/v2"
	"testing"
)

// BenchmarkGemm compares the blocked BLAS product with the plain loop on
// the shapes of a 136-128-128-32 network at batch 64 (forward X W, weight
// gradient X^T D, input gradient D W^T). Reports GFLOP/s (2mnk per call).
func BenchmarkGemm(b *testing.B) {
	type shape struct {
		name    string
		tA, tB  bool
		m, n, k int
	}
	shapes := []shape{
		{"fwd-64x136x128", false, false, 64, 128, 136},
		{"fwd-64x128x128", false, false, 64, 128, 128},
		{"dW-136x128x64", true, false, 136, 128, 64},
		{"dX-64x128x128", false, true, 64, 128, 128},
		{"fwd-256x256x256", false, false, 256, 256, 256},
	}
	rng := rand.New(rand.NewPCG(1, 1))
	for _, s := range shapes {
		lda, ldb := s.k, s.n
		if s.tA {
			lda = s.m
		}
		if s.tB {
			ldb = s.k
		}
		a := randSlice(rng, s.m*s.k)
		bb := randSlice(rng, s.k*s.n)
		c := make([]float64, s.m*s.n)
		flops := 2 * float64(s.m*s.n*s.k)
		for _, impl := range []struct {
			name string
			f    func(bool, bool, int, int, int, float64, []float64, int, []float64, int, float64, []float64, int)
		}{{"blas", gemm}, {"loop", gemmLoop}} {
			b.Run(fmt.Sprintf("%s/%s", s.name, impl.name), func(b *testing.B) {
				b.ReportAllocs()
				for b.Loop() {
					impl.f(s.tA, s.tB, s.m, s.n, s.k, 1, a, lda, bb, ldb, 0, c, s.n)
				}
				b.ReportMetric(flops*float64(b.N)/b.Elapsed().Seconds()/1e9, "GFLOP/s")
			})
		}
	}
}

// BenchmarkStep is one forward, backward and Adam step of an MLP at the
// given sizes and batch.
func BenchmarkStep(b *testing.B) {
	for _, tc := range []struct {
		sizes []int
		n     int
	}{
		{[]int{136, 128, 128, 32}, 64},
		{[]int{256, 256, 256, 64}, 256},
	} {
		b.Run(fmt.Sprintf("sizes=%v/batch=%d", tc.sizes, tc.n), func(b *testing.B) {
			rng := rand.New(rand.NewPCG(2, 2))
			net, _ := New(&Config{Sizes: tc.sizes, MaxBatch: tc.n}, rng)
			opt := NewAdam(net.NumParams(), nil)
			x := randSlice(rng, tc.n*net.In())
			target := randSlice(rng, tc.n*net.Out())
			dy := make([]float64, len(target))
			b.ReportAllocs()
			for b.Loop() {
				y := net.Forward(x, tc.n)
				MSE(dy, y, target, nil, tc.n)
				net.Backward(nil, dy)
				ClipNorm(net.Grad(), 10)
				opt.Step(net.Params(), net.Grad())
			}
		})
	}
}
