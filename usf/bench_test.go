package usf

import (
	"fmt"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// matmulFlops returns the nominal floating-point operations of the matrix
// products of one Neural.Update on a batch of n: for each layer (in, out),
// 2 n in out for the target forward, the online forward and the weight
// gradient, and again for the input gradient of every layer but the first.
func matmulFlops(sizes []int, n int) float64 {
	var f float64
	for l := 0; l+1 < len(sizes); l++ {
		mult := 3.0
		if l > 0 {
			mult = 4
		}
		f += mult * 2 * float64(n*sizes[l]*sizes[l+1])
	}
	return f
}

// neuralBench returns a neural USF and a batch of dense random
// observations (obs 128, d 8, 4 actions) for the benchmarks.
func neuralBench(b *testing.B, hidden []int, n int) (*Neural, *Batch) {
	rng := rand.New(rand.NewPCG(1, 2))
	const obs, na, d = 128, 4, 8
	u, err := NewNeural(obs, na, d, 0.95, &NeuralConfig{Hidden: hidden, MaxBatch: n}, rng)
	if err != nil {
		b.Fatal(err)
	}
	bt := NewBatch(n, obs, d)
	for i := range bt.X {
		bt.X[i] = rng.NormFloat64()
		bt.NextX[i] = rng.NormFloat64()
	}
	for i := range bt.A {
		bt.A[i] = rng.IntN(na)
		bt.Terminal[i] = rng.IntN(10) == 0
		randomUnit(bt.Z[i*d:(i+1)*d], rng)
		for k := 0; k < d; k++ {
			bt.Phi[i*d+k] = rng.Float64()
		}
	}
	return u, bt
}

// BenchmarkNeuralUpdate is one minibatch TD update of the neural USF with
// input 128 + 8, 4 actions x 8 features, batch 64, for one hidden layer of
// 128 and for the default two. It reports updates/s and the GFLOP/s of
// the matrix products (nominal count, see matmulFlops); compare with
// BenchmarkGonumMul on the same shapes.
func BenchmarkNeuralUpdate(b *testing.B) {
	for _, hidden := range [][]int{{128}, {128, 128}} {
		b.Run(fmt.Sprintf("hidden=%v", hidden), func(b *testing.B) {
			const n = 64
			u, bt := neuralBench(b, hidden, n)
			sizes := append(append([]int{128 + 8}, hidden...), 4*8)
			u.Update(bt) // warm-up
			b.ReportAllocs()
			for b.Loop() {
				if _, err := u.Update(bt); err != nil {
					b.Fatal(err)
				}
			}
			sec := b.Elapsed().Seconds()
			b.ReportMetric(float64(b.N)/sec, "updates/s")
			b.ReportMetric(matmulFlops(sizes, n)*float64(b.N)/sec/1e9, "GFLOP/s")
		})
	}
}

// BenchmarkGonumMul measures gonum's dense multiply (mat.Dense.Mul) on the
// forward shapes of BenchmarkNeuralUpdate: batch 64 times a layer's
// weights. Its GFLOP/s is the reference figure for the update's.
func BenchmarkGonumMul(b *testing.B) {
	rng := rand.New(rand.NewPCG(3, 3))
	for _, s := range [][3]int{{64, 136, 128}, {64, 128, 128}, {64, 128, 32}, {136, 64, 128}} {
		m, k, n := s[0], s[1], s[2]
		b.Run(fmt.Sprintf("%dx%dx%d", m, k, n), func(b *testing.B) {
			x := mat.NewDense(m, k, nil)
			w := mat.NewDense(k, n, nil)
			for i := 0; i < m; i++ {
				for j := 0; j < k; j++ {
					x.Set(i, j, rng.NormFloat64())
				}
			}
			for i := 0; i < k; i++ {
				for j := 0; j < n; j++ {
					w.Set(i, j, rng.NormFloat64())
				}
			}
			var c mat.Dense
			c.Mul(x, w)
			b.ReportAllocs()
			for b.Loop() {
				c.Mul(x, w)
			}
			b.ReportMetric(2*float64(m*n*k)*float64(b.N)/b.Elapsed().Seconds()/1e9, "GFLOP/s")
		})
	}
}

// BenchmarkPsi is psi(s, ., z) for one state: the per-step action choice.
func BenchmarkPsi(b *testing.B) {
	b.Run("neural/obs=128+8/hidden=128x128", func(b *testing.B) {
		u, bt := neuralBench(b, nil, 1)
		dst := make([]float64, 32)
		b.ReportAllocs()
		for b.Loop() {
			u.Psi(dst, bt.X[:128], bt.Z[:8])
		}
	})
	b.Run("tabular/S=1000,A=4,d=8,K=16", func(b *testing.B) {
		rng := rand.New(rand.NewPCG(4, 4))
		zs := unitVectors(rng, 16, 8)
		tab, _ := NewTabular(1000, 4, zs, 0.95, nil)
		src, _ := NewSource(tab, zs[15], nil)
		dst := make([]float64, 32)
		b.ReportAllocs()
		for b.Loop() {
			src.Psi(dst, 417)
		}
	})
}
