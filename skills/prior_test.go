package skills

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/internal/vec"
)

func TestUniformSphereMoments(t *testing.T) {
	// Moments of the uniform distribution on S^{d-1} (from memory; they
	// follow from z = g/||g|| with g standard normal): E z = 0,
	// E z_i^2 = 1/d, E z_i z_j = 0 (i != j), E z_i^4 = 3/(d(d+2)),
	// E z_i^2 z_j^2 = 1/(d(d+2)). The sample means are checked to within
	// 4.5 standard errors computed from those moments.
	const n = 40000
	for _, d := range []int{2, 3, 5} {
		rng := rand.New(rand.NewPCG(uint64(d), 11))
		p := UniformSphere{D: d}
		z := make([]float64, d)
		mean := make([]float64, d)
		second := make([]float64, d*d)
		for range n {
			p.Sample(z, rng)
			if nrm := math.Sqrt(vec.DotSeq(z, z)); math.Abs(nrm-1) > 1e-15 {
				t.Fatalf("d=%d: ||z|| = %.17g", d, nrm)
			}
			for i, zi := range z {
				mean[i] += zi / n
				for j, zj := range z {
					second[i*d+j] += zi * zj / n
				}
			}
		}
		fd := float64(d)
		seMean := math.Sqrt(1 / fd / n)
		seDiag := math.Sqrt((3/(fd*(fd+2)) - 1/(fd*fd)) / n)
		seOff := math.Sqrt(1 / (fd * (fd + 2)) / n)
		for i := range d {
			if math.Abs(mean[i]) > 4.5*seMean {
				t.Errorf("d=%d: mean z_%d = %.4g, se %.3g", d, i, mean[i], seMean)
			}
			for j := range d {
				want, se := 0.0, seOff
				if i == j {
					want, se = 1/fd, seDiag
				}
				if got := second[i*d+j]; math.Abs(got-want) > 4.5*se {
					t.Errorf("d=%d: E z_%d z_%d = %.5g, want %.5g (se %.3g)", d, i, j, got, want, se)
				}
			}
		}
		if got, want := p.LogProb(z), -LogSphereArea(d); got != want {
			t.Errorf("d=%d: LogProb = %g, want %g", d, got, want)
		}
	}
}

func TestPriorSeeded(t *testing.T) {
	// Same seed, same bits.
	for _, p := range []Prior{UniformSphere{D: 6}, Categorical{K: 9}} {
		a, b := make([]float64, p.Dim()), make([]float64, p.Dim())
		r1, r2 := rand.New(rand.NewPCG(3, 4)), rand.New(rand.NewPCG(3, 4))
		for range 50 {
			p.Sample(a, r1)
			p.Sample(b, r2)
			for i := range a {
				if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
					t.Fatalf("%T: same seed gave different samples", p)
				}
			}
		}
	}
}

func TestCategoricalPrior(t *testing.T) {
	// Each of K skills has probability 1/K; counts within 4.5 binomial
	// standard errors (common practice).
	const k, n = 7, 70000
	p := Categorical{K: k}
	rng := rand.New(rand.NewPCG(5, 6))
	z := make([]float64, k)
	var counts [k]int
	for range n {
		p.Sample(z, rng)
		i := p.Index(z)
		if i < 0 {
			t.Fatalf("sample %v is not one-hot", z)
		}
		counts[i]++
	}
	se := math.Sqrt(n * (1.0 / k) * (1 - 1.0/k))
	for i, c := range counts {
		if math.Abs(float64(c)-n/k) > 4.5*se {
			t.Errorf("skill %d drawn %d times, expected %.0f (se %.1f)", i, c, float64(n)/k, se)
		}
	}
	if got := p.LogProb([]float64{0, 0, 1, 0, 0, 0, 0}); got != -math.Log(7) {
		t.Errorf("LogProb(e_2) = %g, want -log 7", got)
	}
	for _, z := range [][]float64{{0, 0, 0, 0, 0, 0, 0}, {0, 1, 1, 0, 0, 0, 0}, {0.5, 0.5, 0, 0, 0, 0, 0}} {
		if got := p.LogProb(z); !math.IsInf(got, -1) {
			t.Errorf("LogProb(%v) = %g, want -Inf", z, got)
		}
		if got := p.Index(z); got != -1 {
			t.Errorf("Index(%v) = %d, want -1", z, got)
		}
	}
}

func TestPriorPanics(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	for name, f := range map[string]func(){
		"sphere short dst": func() { UniformSphere{D: 3}.Sample(make([]float64, 2), rng) },
		"sphere d=1":       func() { UniformSphere{D: 1}.Sample(make([]float64, 1), rng) },
		"sphere logprob":   func() { UniformSphere{D: 3}.LogProb(make([]float64, 4)) },
		"categorical dst":  func() { Categorical{K: 3}.Sample(make([]float64, 2), rng) },
		"categorical z":    func() { Categorical{K: 3}.LogProb(make([]float64, 2)) },
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
