package linalg_test

import (
	"fmt"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/linalg"
)

func ExampleSuccessor() {
	// A two-state chain that always switches state.
	p := mat.NewDense(2, 2, []float64{0, 1, 1, 0})
	var m mat.Dense
	if err := linalg.Successor(&m, p, 0.5); err != nil {
		fmt.Println(err)
		return
	}
	// Row sums are 1/(1 - gamma) = 2.
	fmt.Printf("%.4f\n", mat.Formatted(&m))
	// Output:
	// ⎡1.3333  0.6667⎤
	// ⎣0.6667  1.3333⎦
}

func ExampleSolveIterative() {
	// Random walk on a 3x3 grid. With b = 1 the solution of
	// (I - gamma P) x = b is 1/(1 - gamma) in every state, since P 1 = 1.
	p := linalg.GridWalk(3, 3)
	b := []float64{1, 1, 1, 1, 1, 1, 1, 1, 1}
	x := make([]float64, 9)
	res, err := linalg.SolveIterative(x, p, 0.9, b, &linalg.IterConfig{Tol: 1e-10})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("x = %.6f\n", x)
	fmt.Println("method:", res.Method, "converged:", res.Residual <= 1e-10)
	// Output:
	// x = [10.000000 10.000000 10.000000 10.000000 10.000000 10.000000 10.000000 10.000000 10.000000]
	// method: cg converged: true
}

func ExampleFundamental() {
	// Drunkard's Walk (Grinstead & Snell, Example 11.13): transient states
	// 1, 2, 3 between absorbing ends 0 and 4.
	q := mat.NewDense(3, 3, []float64{
		0, 0.5, 0,
		0.5, 0, 0.5,
		0, 0.5, 0,
	})
	var n mat.Dense
	if err := linalg.Fundamental(&n, q); err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("N =\n%.2f\n", mat.Formatted(&n))
	var t mat.VecDense
	t.MulVec(&n, mat.NewVecDense(3, []float64{1, 1, 1}))
	fmt.Printf("steps to absorption: %.2f\n", t.RawVector().Data)
	// Output:
	// N =
	// ⎡1.50  1.00  0.50⎤
	// ⎢1.00  2.00  1.00⎥
	// ⎣0.50  1.00  1.50⎦
	// steps to absorption: [3.00 4.00 3.00]
}

func ExampleStationary() {
	// Land of Oz weather (Grinstead & Snell, Example 11.1): rain, nice, snow.
	p := mat.NewDense(3, 3, []float64{
		0.5, 0.25, 0.25,
		0.5, 0, 0.5,
		0.25, 0.25, 0.5,
	})
	var pi mat.VecDense
	if err := linalg.Stationary(&pi, p); err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("%.3f\n", pi.RawVector().Data)
	// Output:
	// [0.400 0.200 0.400]
}

func ExampleRidge() {
	// Invented data: rewards observed in four places, each described by two
	// features; the rewards are exactly 2*f1 - 1*f2.
	x := mat.NewDense(4, 2, []float64{
		1, 0,
		0, 1,
		1, 1,
		2, 1,
	})
	y := mat.NewVecDense(4, []float64{2, -1, 1, 3})
	var w mat.VecDense
	rss, err := linalg.Ridge(&w, x, y, 0)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("w = %.4f, residual %.3f\n", w.RawVector().Data, rss)
	// Regularisation shrinks w towards 0: by hand, (X^T X + I) w = X^T y is
	// [[7 3] [3 4]] w = [9 3], so w = [27/19, -6/19].
	if _, err := linalg.Ridge(&w, x, y, 1); err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("w = %.4f with lambda = 1\n", w.RawVector().Data)
	// Output:
	// w = [2.0000 -1.0000], residual 0.000
	// w = [1.4211 -0.3158] with lambda = 1
}

func ExampleRLS() {
	// The same invented data as in the Ridge example, one sample at a time.
	r, err := linalg.NewRLS(2, 1)
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, s := range []struct {
		x []float64
		y float64
	}{{[]float64{1, 0}, 2}, {[]float64{0, 1}, -1}, {[]float64{1, 1}, 1}, {[]float64{2, 1}, 3}} {
		if err := r.Update(s.x, s.y); err != nil {
			fmt.Println(err)
			return
		}
	}
	fmt.Printf("w = %.4f after %d samples\n", r.Weights(), r.Count())
	// Output:
	// w = [1.4211 -0.3158] after 4 samples
}

func ExampleSolveIterative_breakdown() {
	// The state-action chain of the 5-state random walk (Sutton & Barto,
	// Reinforcement Learning, 2nd ed., Example 6.2) under the uniform
	// policy: pair (s, a) is 2s + a, left (0) and right (1) move one state
	// and then either action follows with probability 1/2; moves off
	// either end terminate, so rows 0 and 9 of P are zero.
	var tr []linalg.Triplet
	for s := 0; s < 5; s++ {
		if s > 0 {
			tr = append(tr, linalg.Triplet{Row: 2 * s, Col: 2 * (s - 1), Val: 0.5}, linalg.Triplet{Row: 2 * s, Col: 2*s - 1, Val: 0.5})
		}
		if s < 4 {
			tr = append(tr, linalg.Triplet{Row: 2*s + 1, Col: 2 * (s + 1), Val: 0.5}, linalg.Triplet{Row: 2*s + 1, Col: 2*s + 3, Val: 0.5})
		}
	}
	p, err := linalg.CSRFromTriplets(10, 10, tr)
	if err != nil {
		fmt.Println(err)
		return
	}
	// With b = e_9 and Jacobi preconditioning the first shadow residual
	// e_9 is a left eigenvector of I - gamma P, so BiCGSTAB breaks down
	// (rho = 0) and restarts with a pseudo-random shadow residual.
	b := make([]float64, 10)
	b[9] = 1
	x := make([]float64, 10)
	res, err := linalg.SolveIterative(x, p, 0.9, b, &linalg.IterConfig{
		Tol: 1e-12, Method: linalg.IterBiCGSTAB, Precond: linalg.PrecondJacobi,
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	// x[9] = 1 since from (4, right) the episode ends after one step, and
	// every other x[k] = b[k] + 0.45 (sum over its two successor pairs),
	// e.g. x[7] = 0.45 (x[8] + x[9]) (derived by hand).
	fmt.Printf("x = %.4f\n", x)
	fmt.Println("method:", res.Method, "breakdowns:", res.Breakdowns, "converged:", res.Residual <= 1e-12)
	// Output:
	// x = [0.0000 0.1310 0.0590 0.2322 0.1310 0.3849 0.2322 0.6232 0.3849 1.0000]
	// method: bicgstab breakdowns: 1 converged: true
}
