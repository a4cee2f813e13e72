package linalg_test

import (
	"fmt"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/linalg"
)

// Benchmarks carry the speed and memory targets (see doc.go). B/op of the
// iterative benchmarks is the solver's whole workspace: the chain and b are
// built before the timer starts and x is reused, so B/op measures the
// memory the solver needs beyond the CSR.

var gridSides = []int{20, 32, 45} // n = 400, 1024, 2025

// gonumLU solves (I - gamma P) X = B with gonum's plain dense LU, the
// baseline beside our solvers.
func gonumLU(dst *mat.Dense, p *mat.Dense, gamma float64, b mat.Matrix) {
	n, _ := p.Dims()
	a := mat.NewDense(n, n, nil)
	a.Scale(-gamma, p)
	for i := 0; i < n; i++ {
		a.Set(i, i, a.At(i, i)+1)
	}
	var lu mat.LU
	lu.Factorize(a)
	if err := lu.SolveTo(dst, false, b); err != nil {
		panic(err)
	}
}

func BenchmarkSuccessor(b *testing.B) {
	for _, side := range gridSides {
		p := linalg.GridWalk(side, side)
		n := side * side
		pd := p.ToDense()
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			b.ReportAllocs()
			var m mat.Dense
			for b.Loop() {
				if err := linalg.Successor(&m, pd, 0.95); err != nil {
					b.Fatal(err)
				}
			}
		})
		b.Run(fmt.Sprintf("gonumLU/n=%d", n), func(b *testing.B) {
			b.ReportAllocs()
			var m mat.Dense
			eye := mat.NewDiagDense(n, nil)
			for i := 0; i < n; i++ {
				eye.SetDiag(i, 1)
			}
			for b.Loop() {
				gonumLU(&m, pd, 0.95, eye)
			}
		})
	}
}

func BenchmarkSolveSuccessor(b *testing.B) {
	for _, side := range gridSides {
		p := linalg.GridWalk(side, side)
		n := side * side
		pd := p.ToDense()
		rhs := randDense(n, 16, rand.New(rand.NewPCG(1, 1)))
		b.Run(fmt.Sprintf("n=%d/rhs=16", n), func(b *testing.B) {
			b.ReportAllocs()
			var x mat.Dense
			for b.Loop() {
				if err := linalg.SolveSuccessor(&x, pd, 0.95, rhs); err != nil {
					b.Fatal(err)
				}
			}
		})
		b.Run(fmt.Sprintf("csr/n=%d/rhs=16", n), func(b *testing.B) {
			b.ReportAllocs()
			var x mat.Dense
			for b.Loop() {
				if err := linalg.SolveSuccessor(&x, p, 0.95, rhs); err != nil {
					b.Fatal(err)
				}
			}
		})
		b.Run(fmt.Sprintf("gonumLU/n=%d/rhs=16", n), func(b *testing.B) {
			b.ReportAllocs()
			var x mat.Dense
			for b.Loop() {
				gonumLU(&x, pd, 0.95, rhs)
			}
		})
	}
	// A dense chain with no band structure takes the dense path.
	p := randStochastic(1024, 0, rand.New(rand.NewPCG(2, 2)))
	rhs := randDense(1024, 16, rand.New(rand.NewPCG(1, 1)))
	b.Run("dense/n=1024/rhs=16", func(b *testing.B) {
		b.ReportAllocs()
		var x mat.Dense
		for b.Loop() {
			if err := linalg.SolveSuccessor(&x, p, 0.95, rhs); err != nil {
				b.Fatal(err)
			}
		}
	})
}

// Grid sides for n = 10^4, about 10^5 (316^2 = 99856) and 10^6.
var iterSides = []int{100, 316, 1000}

func BenchmarkSolveIterative(b *testing.B) {
	for _, side := range iterSides {
		p := linalg.GridWalk(side, side)
		n := side * side
		rhs := randVec(n, rand.New(rand.NewPCG(3, 3)))
		x := make([]float64, n)
		set := &linalg.IterConfig{Tol: 1e-6}
		b.Run(fmt.Sprintf("n=%d/rhs=1", n), func(b *testing.B) {
			b.ReportAllocs()
			var res linalg.IterResult
			for b.Loop() {
				var err error
				if res, err = linalg.SolveIterative(x, p, 0.99, rhs, set); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(res.Iterations), "iters")
		})
		b.Run(fmt.Sprintf("jacobi/n=%d/rhs=1", n), func(b *testing.B) {
			b.ReportAllocs()
			var res linalg.IterResult
			jset := &linalg.IterConfig{Tol: 1e-6, Precond: linalg.PrecondJacobi}
			for b.Loop() {
				var err error
				if res, err = linalg.SolveIterative(x, p, 0.99, rhs, jset); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(res.Iterations), "iters")
		})
		b.Run(fmt.Sprintf("serial/n=%d/rhs=1", n), func(b *testing.B) {
			b.ReportAllocs()
			sset := &linalg.IterConfig{Tol: 1e-6, Workers: 1}
			for b.Loop() {
				if _, err := linalg.SolveIterative(x, p, 0.99, rhs, sset); err != nil {
					b.Fatal(err)
				}
			}
		})
		bm := randDense(n, 16, rand.New(rand.NewPCG(4, 4)))
		b.Run(fmt.Sprintf("n=%d/rhs=16", n), func(b *testing.B) {
			b.ReportAllocs()
			var xm mat.Dense
			for b.Loop() {
				if _, err := linalg.SolveIterativeMulti(&xm, p, 0.99, bm, set); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
	// A non-symmetric sparse chain (BiCGSTAB).
	p := randSparseChain(100000, 5, rand.New(rand.NewPCG(5, 5)))
	rhs := randVec(100000, rand.New(rand.NewPCG(6, 6)))
	x := make([]float64, 100000)
	b.Run("random/n=100000/rhs=1", func(b *testing.B) {
		b.ReportAllocs()
		var res linalg.IterResult
		for b.Loop() {
			var err error
			if res, err = linalg.SolveIterative(x, p, 0.99, rhs, &linalg.IterConfig{Tol: 1e-6}); err != nil {
				b.Fatal(err)
			}
		}
		b.ReportMetric(float64(res.Iterations), "iters")
	})
}

// BenchmarkIterSolver shows repeated solves with a reused IterSolver (the
// policy-iteration pattern) allocate nothing.
func BenchmarkIterSolver(b *testing.B) {
	p := linalg.GridWalk(30, 30)
	rhs := randVec(900, rand.New(rand.NewPCG(3, 3)))
	x := make([]float64, 900)
	var s linalg.IterSolver
	set := &linalg.IterConfig{Tol: 1e-8}
	b.ReportAllocs()
	for b.Loop() {
		if _, err := s.Solve(x, p, 0.95, rhs, set); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkIterSolverBreakdown: the state-action walk with b = e_last,
// where BiCGSTAB breaks down at its second iteration and restarts with a
// pseudo-random shadow residual, and GMRES(30) on the same system; the
// reused IterSolver allocates nothing on either path.
func BenchmarkIterSolverBreakdown(b *testing.B) {
	p := walkStateAction(2100)
	rhs := make([]float64, 4200)
	rhs[4199] = 1
	x := make([]float64, 4200)
	for _, c := range []struct {
		name string
		set  *linalg.IterConfig
	}{
		{"auto", &linalg.IterConfig{Tol: 1e-10}},
		{"bicgstab-jacobi", &linalg.IterConfig{Tol: 1e-10, Method: linalg.IterBiCGSTAB, Precond: linalg.PrecondJacobi}},
		{"gmres", &linalg.IterConfig{Tol: 1e-10, Method: linalg.IterGMRES}},
	} {
		b.Run(c.name+"/n=4200/gamma=0.99", func(b *testing.B) {
			b.ReportAllocs()
			var s linalg.IterSolver
			var res linalg.IterResult
			for b.Loop() {
				var err error
				if res, err = s.Solve(x, p, 0.99, rhs, c.set); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(res.Iterations), "iters")
			b.ReportMetric(float64(res.Breakdowns), "breakdowns")
		})
	}
}

func BenchmarkMulVecTo(b *testing.B) {
	for _, side := range iterSides {
		p := linalg.GridWalk(side, side)
		n := side * side
		x, y := randVec(n, rand.New(rand.NewPCG(1, 1))), make([]float64, n)
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				p.MulVecTo(y, x)
			}
		})
	}
}

func BenchmarkRLSUpdate(b *testing.B) {
	for _, d := range []int{4, 16, 64} {
		r, err := linalg.NewRLS(d, 1)
		if err != nil {
			b.Fatal(err)
		}
		x := randVec(d, rand.New(rand.NewPCG(1, 1)))
		b.Run(fmt.Sprintf("d=%d", d), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if err := r.Update(x, 0.5); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

func BenchmarkStationary(b *testing.B) {
	for _, side := range gridSides {
		p := linalg.GridWalk(side, side)
		b.Run(fmt.Sprintf("n=%d", side*side), func(b *testing.B) {
			b.ReportAllocs()
			var pi mat.VecDense
			for b.Loop() {
				if err := linalg.Stationary(&pi, p); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
