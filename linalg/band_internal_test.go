package linalg

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/internal/testtol"
)

// TestBandLUPivots makes sure the banded LU does interchange rows on a
// non-dominant banded matrix (so the pivoting code is exercised by the
// comparisons with gonum in dense_test.go) and not on a grid chain: there
// P is symmetric, so column j of I - gamma P has off-diagonal sum
// gamma (1 - p_jj) < 1 - gamma p_jj, the diagonal (derived by hand); the
// matrix is column diagonally dominant, and partial pivoting then never
// interchanges rows (Golub & Van Loan, Matrix Computations, 4th ed.,
// §3.4.10, from memory).
func TestBandLUPivots(t *testing.T) {
	rnd := rand.New(rand.NewPCG(1, 1))
	n, kl, ku := 200, 3, 4
	p := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		for j := max(0, i-kl); j <= min(n-1, i+ku); j++ {
			p.Set(i, j, 2*rnd.Float64()-1)
		}
	}
	count := func(p mat.Matrix, gamma float64) int {
		n, _ := p.Dims()
		kl, ku, err := bandwidths(p)
		if err != nil {
			t.Fatal(err)
		}
		var f bandLU
		f.init(n, kl, ku)
		f.fill(p, gamma)
		if err := f.factor(); err != nil {
			t.Fatal(err)
		}
		var c int
		for k, q := range f.piv {
			if q != k {
				c++
			}
		}
		return c
	}
	if c := count(p, 0.95); c == 0 {
		t.Error("no row interchange on a non-dominant matrix")
	}
	if c := count(GridWalk(10, 12), 0.99); c != 0 {
		t.Errorf("%d row interchanges on a grid chain", c)
	}
}

// TestIdentitySolveAgainstGonum checks the identity solve of Successor
// (solveSuccessor with no right-hand side, the parallel one for n >= 512)
// against gonum's dense LU on random banded matrices that need pivoting,
// which Successor itself refuses since they are not chains.
func TestIdentitySolveAgainstGonum(t *testing.T) {
	rnd := rand.New(rand.NewPCG(7, 8))
	for _, c := range []struct{ n, kl, ku int }{{300, 3, 6}, {300, 8, 0}, {700, 5, 2}} {
		p := mat.NewDense(c.n, c.n, nil)
		s := 6 / float64(c.kl+c.ku+1)
		for i := 0; i < c.n; i++ {
			for j := max(0, i-c.kl); j <= min(c.n-1, i+c.ku); j++ {
				p.Set(i, j, s*(2*rnd.Float64()-1))
			}
		}
		var m mat.Dense
		if err := solveSuccessor(&m, p, 0.9, nil); err != nil {
			t.Fatalf("n=%d kl=%d ku=%d: %v", c.n, c.kl, c.ku, err)
		}
		a := mat.NewDense(c.n, c.n, nil)
		a.Scale(-0.9, p)
		eye := mat.NewDense(c.n, c.n, nil)
		for i := 0; i < c.n; i++ {
			a.Set(i, i, a.At(i, i)+1)
			eye.Set(i, i, 1)
		}
		var want mat.Dense
		if err := want.Solve(a, eye); err != nil {
			t.Fatal(err)
		}
		var d, sc float64
		for i := 0; i < c.n; i++ {
			for j := 0; j < c.n; j++ {
				d = max(d, math.Abs(m.At(i, j)-want.At(i, j)))
				sc = max(sc, math.Abs(want.At(i, j)))
			}
		}
		if d/max(1, sc) > testtol.Solve {
			t.Errorf("n=%d kl=%d ku=%d: differs from gonum LU by %.3g", c.n, c.kl, c.ku, d/max(1, sc))
		}
	}
}
