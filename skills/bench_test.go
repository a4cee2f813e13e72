package skills

import (
	"fmt"
	"math/rand/v2"
	"testing"
)

// depotStates is the size of the tabular depot floor of the examples
// (about 100 cells; invented demo data).
const depotStates = 100

func benchBatch(rng *rand.Rand, n, d int, p Prior) (x, z []float64) {
	x, z = make([]float64, n*depotStates), make([]float64, n*d)
	for i := range n {
		OneHot(x[i*depotStates:(i+1)*depotStates], rng.IntN(depotStates))
		p.Sample(z[i*d:(i+1)*d], rng)
	}
	return x, z
}

func BenchmarkUpdate(b *testing.B) {
	for _, d := range []int{8, 32} {
		rng := rand.New(rand.NewPCG(1, 1))
		v, _ := NewVMF(&VMFConfig{In: depotStates, Dim: d}, rng)
		x, z := benchBatch(rng, 64, d, UniformSphere{D: d})
		b.Run(fmt.Sprintf("vmf/linear/d=%d", d), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				v.Update(x, z)
			}
		})
		s, _ := NewSoftmax(&SoftmaxConfig{In: depotStates, K: d}, rng)
		x, z = benchBatch(rng, 64, d, Categorical{K: d})
		b.Run(fmt.Sprintf("softmax/linear/K=%d", d), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				s.Update(x, z)
			}
		})
	}
	rng := rand.New(rand.NewPCG(1, 2))
	v, _ := NewVMF(&VMFConfig{In: depotStates, Dim: 8, Net: NetConfig{Hidden: []int{64, 64}}}, rng)
	x, z := benchBatch(rng, 64, 8, UniformSphere{D: 8})
	b.Run("vmf/mlp64x64/d=8", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			v.Update(x, z)
		}
	})
}

// BenchmarkUpdateSparse compares dense and sparse Adam at the depot's size
// (105 one-hot states, d = 64; invented demo data) for minibatches of 1 and
// 64 states.
func BenchmarkUpdateSparse(b *testing.B) {
	const states, d = 105, 64
	for _, batch := range []int{1, 64} {
		for _, m := range []OptimMethod{OptimAdam, OptimSparseAdam} {
			rng := rand.New(rand.NewPCG(1, 7))
			v, _ := NewVMF(&VMFConfig{In: states, Dim: d, Optim: OptimConfig{Method: m}}, rng)
			x, z := make([]float64, batch*states), make([]float64, batch*d)
			for i := range batch {
				OneHot(x[i*states:(i+1)*states], rng.IntN(states))
				UniformSphere{D: d}.Sample(z[i*d:(i+1)*d], rng)
			}
			b.Run(fmt.Sprintf("vmf/n=%d/d=%d/batch=%d/%v", states, d, batch, m), func(b *testing.B) {
				b.ReportAllocs()
				for b.Loop() {
					v.Update(x, z)
				}
			})
		}
	}
}

func BenchmarkReward(b *testing.B) {
	for _, d := range []int{8, 32} {
		rng := rand.New(rand.NewPCG(1, 3))
		v, _ := NewVMF(&VMFConfig{In: depotStates, Dim: d}, rng)
		x, z := benchBatch(rng, 1, d, UniformSphere{D: d})
		b.Run(fmt.Sprintf("vmf/d=%d", d), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				v.Reward(x, z)
			}
		})
		s, _ := NewSoftmax(&SoftmaxConfig{In: depotStates, K: d}, rng)
		x, z = benchBatch(rng, 1, d, Categorical{K: d})
		b.Run(fmt.Sprintf("softmax/K=%d", d), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				s.Reward(x, z)
			}
		})
		fm, _ := NewFeatureMap(v, &MapConfig{Frozen: true, States: depotStates})
		phi := make([]float64, d)
		b.Run(fmt.Sprintf("featuremap/table/d=%d", d), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				fm.Features(phi, 0, 0, 42)
			}
		})
	}
}

func BenchmarkVMFLogNorm(b *testing.B) {
	for _, k := range []float64{0.5, 10, 100, 1000} {
		b.Run(fmt.Sprintf("d=32/kappa=%g", k), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				VMFLogNorm(32, k)
			}
		})
	}
}

// BenchmarkVMFMeanLength measures the continued fraction of A_d(kappa)
// across the range of kappa (the cost peaks near 1e8, where the starting
// bounds are loose and the damping per step weak).
func BenchmarkVMFMeanLength(b *testing.B) {
	for _, kappa := range []float64{10, 1e3, 1e6, 1e8, 1e10} {
		b.Run(fmt.Sprintf("d=64/kappa=%g", kappa), func(b *testing.B) {
			b.ReportAllocs()
			var s float64
			for b.Loop() {
				s += VMFMeanLength(64, kappa)
			}
			if s < 0 {
				b.Fatal(s)
			}
		})
	}
}
