package linalg_test

import (
	"math"
	"math/rand/v2"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/linalg"
)

// randStochastic returns a dense n x n row-stochastic matrix whose entries
// are zero with probability zero (0 <= zero < 1), with at least one
// positive entry per row.
func randStochastic(n int, zero float64, rnd *rand.Rand) *mat.Dense {
	p := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		var s float64
		for j := 0; j < n; j++ {
			if rnd.Float64() >= zero {
				v := rnd.Float64()
				p.Set(i, j, v)
				s += v
			}
		}
		if s == 0 {
			j := rnd.IntN(n)
			p.Set(i, j, 1)
			s = 1
		}
		for j := 0; j < n; j++ {
			p.Set(i, j, p.At(i, j)/s)
		}
	}
	return p
}

// randSparseChain returns an n-state chain with about deg random successors
// per state (a non-symmetric sparse stochastic matrix).
func randSparseChain(n, deg int, rnd *rand.Rand) *linalg.CSR {
	var t []linalg.Triplet
	for i := 0; i < n; i++ {
		w := make([]float64, deg)
		var s float64
		for k := range w {
			w[k] = rnd.Float64() + 0.01
			s += w[k]
		}
		for k := range w {
			t = append(t, linalg.Triplet{Row: i, Col: rnd.IntN(n), Val: w[k] / s})
		}
	}
	c, err := linalg.CSRFromTriplets(n, n, t)
	if err != nil {
		panic(err)
	}
	return c
}

// randBanded returns an n x n matrix with lower and upper bandwidths kl, ku
// and entries uniform in [-s, s], s = 6/(kl+ku+1), inside the band (not
// stochastic: I - gamma P is not diagonally dominant in many rows, so the
// banded LU has to pivot).
func randBanded(n, kl, ku int, rnd *rand.Rand) *mat.Dense {
	p := mat.NewDense(n, n, nil)
	s := 6 / float64(kl+ku+1)
	for i := 0; i < n; i++ {
		for j := max(0, i-kl); j <= min(n-1, i+ku); j++ {
			p.Set(i, j, s*(2*rnd.Float64()-1))
		}
	}
	return p
}

func randVec(n int, rnd *rand.Rand) []float64 {
	v := make([]float64, n)
	for i := range v {
		v[i] = rnd.NormFloat64()
	}
	return v
}

func randDense(r, c int, rnd *rand.Rand) *mat.Dense {
	return mat.NewDense(r, c, randVec(r*c, rnd))
}

// gonumSolve solves (I - gamma P) X = B with gonum's dense LU, the
// reference for our solvers.
func gonumSolve(p mat.Matrix, gamma float64, b mat.Matrix) *mat.Dense {
	n, _ := p.Dims()
	a := mat.NewDense(n, n, nil)
	a.Scale(-gamma, p)
	for i := 0; i < n; i++ {
		a.Set(i, i, a.At(i, i)+1)
	}
	var x mat.Dense
	if err := x.Solve(a, b); err != nil {
		panic(err)
	}
	return &x
}

// shifted returns I - gamma P as a dense matrix.
func shifted(p mat.Matrix, gamma float64) *mat.Dense {
	n, _ := p.Dims()
	a := mat.NewDense(n, n, nil)
	a.Scale(-gamma, p)
	for i := 0; i < n; i++ {
		a.Set(i, i, a.At(i, i)+1)
	}
	return a
}

// maxRelDiff returns max |a - b| / max(1, max |b|).
func maxRelDiff(a, b mat.Matrix) float64 {
	r, c := b.Dims()
	var d, s float64
	for i := 0; i < r; i++ {
		for j := 0; j < c; j++ {
			d = max(d, math.Abs(a.At(i, j)-b.At(i, j)))
			s = max(s, math.Abs(b.At(i, j)))
		}
	}
	return d / max(1, s)
}

func norm2(v []float64) float64 {
	var s float64
	for _, x := range v {
		s += x * x
	}
	return math.Sqrt(s)
}
