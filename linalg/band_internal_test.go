package linalg

import (
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
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
