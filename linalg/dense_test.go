package linalg_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/internal/testtol"
	"github.com/successor-go/successor/linalg"
)

// TestSuccessorPowerSeries checks M = sum_{t>=0} gamma^t P^t = (I - gamma P)^-1
// (the definition of the successor representation, Stachenfeld et al.
// 2017, The hippocampus as a predictive map, Methods) against the truncated
// series, and the row sums 1/(1 - gamma) that follow from P 1 = 1.
func TestSuccessorPowerSeries(t *testing.T) {
	for seed := uint64(0); seed < 40; seed++ {
		rnd := rand.New(rand.NewPCG(seed, 1))
		n := 1 + rnd.IntN(12)
		gamma := []float64{0, 0.3, 0.9, 0.95}[seed%4]
		p := randStochastic(n, 0.5, rnd)
		var m mat.Dense
		if err := linalg.Successor(&m, p, gamma); err != nil {
			t.Fatalf("seed %d: %v", seed, err)
		}
		// Truncate when the tail bound gamma^T / (1 - gamma) < 1e-14.
		series := mat.NewDense(n, n, nil)
		term := mat.NewDense(n, n, nil)
		for i := 0; i < n; i++ {
			term.Set(i, i, 1)
		}
		for k := 0; ; k++ {
			series.Add(series, term)
			if math.Pow(gamma, float64(k+1))/(1-gamma) < 1e-14 {
				break
			}
			var next mat.Dense
			next.Mul(term, p)
			next.Scale(gamma, &next)
			term = &next
		}
		if d := maxRelDiff(&m, series); d > 1e-11 {
			t.Errorf("seed %d n=%d gamma=%v: M differs from series by %.3g", seed, n, gamma, d)
		}
		want := 1 / (1 - gamma)
		for i := 0; i < n; i++ {
			if s := mat.Sum(m.RowView(i)); math.Abs(s-want) > testtol.Exact*want*float64(n) {
				t.Errorf("seed %d: row %d sums to %v, want 1/(1-gamma) = %v", seed, i, s, want)
			}
			for j := 0; j < n; j++ {
				if m.At(i, j) < -testtol.Exact {
					t.Errorf("seed %d: M[%d][%d] = %v negative", seed, i, j, m.At(i, j))
				}
			}
		}
	}
}

// TestSuccessorProperties checks (I - gamma P) M = I on many seeded random
// chains, dense and CSR, on the banded and the dense path.
func TestSuccessorProperties(t *testing.T) {
	for seed := uint64(0); seed < 60; seed++ {
		rnd := rand.New(rand.NewPCG(seed, 2))
		var p mat.Matrix
		switch seed % 3 {
		case 0:
			p = randStochastic(1+rnd.IntN(30), 0.7, rnd)
		case 1:
			p = randSparseChain(1+rnd.IntN(60), 3, rnd)
		case 2:
			p = linalg.GridWalk(1+rnd.IntN(8), 1+rnd.IntN(20))
		}
		n, _ := p.Dims()
		gamma := rnd.Float64() * 0.999
		var m mat.Dense
		if err := linalg.Successor(&m, p, gamma); err != nil {
			t.Fatalf("seed %d: %v", seed, err)
		}
		var prod mat.Dense
		prod.Mul(shifted(p, gamma), &m)
		for i := 0; i < n; i++ {
			prod.Set(i, i, prod.At(i, i)-1)
		}
		// ||(I - gamma P) M - I|| is at most about n eps ||M||, ||M||_inf = 1/(1-gamma).
		if d := mat.Norm(&prod, math.Inf(1)); d > 1e-13*float64(n+1)/(1-gamma) {
			t.Errorf("seed %d n=%d gamma=%.3f: ||(I-gamma P)M - I|| = %.3g", seed, n, gamma, d)
		}
	}
}

// TestSolveSuccessorAgainstGonum compares with gonum's dense LU (the
// reference solver), on the banded path (grid chains, random banded
// matrices that need pivoting) and on the dense path.
func TestSolveSuccessorAgainstGonum(t *testing.T) {
	rnd := rand.New(rand.NewPCG(7, 7))
	cases := []struct {
		name  string
		p     mat.Matrix
		gamma float64
	}{
		{"grid 20x20", linalg.GridWalk(20, 20), 0.95},
		{"grid 7x31 as dense", linalg.GridWalk(7, 31).ToDense(), 0.99},
		{"grid 1x50", linalg.GridWalk(1, 50), 0.5},
		{"banded 300 kl=3 ku=6, pivoting", randBanded(300, 3, 6, rnd), 0.9},
		{"banded 300 kl=8 ku=0", randBanded(300, 8, 0, rnd), 0.7},
		{"banded 300 kl=0 ku=5", randBanded(300, 0, 5, rnd), 0.7},
		{"banded 700 kl=5 ku=2, parallel identity solve", randBanded(700, 5, 2, rnd), 0.95},
		{"dense 40", randStochastic(40, 0, rnd), 0.9},
		{"sparse random 80", randSparseChain(80, 4, rnd), 0.99},
	}
	for _, c := range cases {
		n, _ := c.p.Dims()
		b := randDense(n, 5, rnd)
		var x mat.Dense
		if err := linalg.SolveSuccessor(&x, c.p, c.gamma, b); err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		want := gonumSolve(c.p, c.gamma, b)
		if d := maxRelDiff(&x, want); d > testtol.Solve {
			t.Errorf("%s: differs from gonum LU by %.3g", c.name, d)
		}
		// Successor on the same path, against gonum's solve for I. The
		// random banded matrices have negative entries: Successor refuses
		// them (no chain), and TestIdentitySolveAgainstGonum checks its
		// identity solve on them.
		var m mat.Dense
		if linalg.CheckStochastic(c.p, 1e-12) != nil {
			if err := linalg.Successor(&m, c.p, c.gamma); !errors.Is(err, linalg.ErrNotStochastic) {
				t.Errorf("%s: successor of a matrix with negative entries: %v, want ErrNotStochastic", c.name, err)
			}
			continue
		}
		if err := linalg.Successor(&m, c.p, c.gamma); err != nil {
			t.Fatalf("%s: successor: %v", c.name, err)
		}
		eye := mat.NewDense(n, n, nil)
		for i := 0; i < n; i++ {
			eye.Set(i, i, 1)
		}
		if d := maxRelDiff(&m, gonumSolve(c.p, c.gamma, eye)); d > testtol.Solve {
			t.Errorf("%s: successor differs from gonum LU by %.3g", c.name, d)
		}
		// b may be dst.
		bc := mat.DenseCopyOf(b)
		if err := linalg.SolveSuccessor(bc, c.p, c.gamma, bc); err != nil {
			t.Fatalf("%s in place: %v", c.name, err)
		}
		if !mat.Equal(bc, &x) {
			t.Errorf("%s: in-place solve differs", c.name)
		}
	}
}

func TestSolveSuccessorErrors(t *testing.T) {
	p := linalg.GridWalk(2, 2)
	nan := mat.NewDense(2, 2, []float64{0.5, 0.5, math.NaN(), 0.5})
	inf := mat.NewDense(2, 1, []float64{1, math.Inf(-1)})
	cases := []struct {
		name  string
		dst   *mat.Dense
		p     mat.Matrix
		gamma float64
		b     mat.Matrix
		want  error
	}{
		{"gamma negative", &mat.Dense{}, p, -0.1, mat.NewDense(4, 1, nil), linalg.ErrDiscount},
		{"gamma one", &mat.Dense{}, p, 1, mat.NewDense(4, 1, nil), linalg.ErrDiscount},
		{"gamma NaN", &mat.Dense{}, p, math.NaN(), mat.NewDense(4, 1, nil), linalg.ErrDiscount},
		{"not square", &mat.Dense{}, mat.NewDense(2, 3, nil), 0.5, mat.NewDense(2, 1, nil), linalg.ErrDimension},
		{"b rows", &mat.Dense{}, p, 0.5, mat.NewDense(3, 1, nil), linalg.ErrDimension},
		{"dst shape", mat.NewDense(4, 2, nil), p, 0.5, mat.NewDense(4, 1, nil), linalg.ErrDimension},
		{"NaN in p", &mat.Dense{}, nan, 0.5, mat.NewDense(2, 1, nil), linalg.ErrNonFinite},
		{"Inf in b", &mat.Dense{}, mat.NewDense(2, 2, nil), 0.5, inf, linalg.ErrNonFinite},
		// I - 0.5 (2 I) = 0: dense path (n = 1) and banded path (n = 100).
		{"singular dense", &mat.Dense{}, mat.NewDense(1, 1, []float64{2}), 0.5, mat.NewDense(1, 1, []float64{1}), linalg.ErrSingular},
		{"singular banded", &mat.Dense{}, scaledEye(100, 2), 0.5, mat.NewDense(100, 1, nil), linalg.ErrSingular},
		// Rank one I - gamma P: P = ones/ (gamma n) with n = 3 leaves rank 2.
		{"singular dense rank", &mat.Dense{}, constant(3, 1/(0.5*3)), 0.5, mat.NewDense(3, 1, nil), linalg.ErrSingular},
	}
	for _, c := range cases {
		err := linalg.SolveSuccessor(c.dst, c.p, c.gamma, c.b)
		if !errors.Is(err, c.want) {
			t.Errorf("%s: got %v, want %v", c.name, err, c.want)
		}
		if c.name == "gamma one" || c.name == "not square" || c.name == "NaN in p" {
			var m mat.Dense
			if err := linalg.Successor(&m, c.p, c.gamma); !errors.Is(err, c.want) {
				t.Errorf("Successor %s: got %v, want %v", c.name, err, c.want)
			}
		}
	}
	if err := linalg.Successor(mat.NewDense(3, 3, nil), p, 0.5); !errors.Is(err, linalg.ErrDimension) {
		t.Errorf("Successor dst shape: got %v", err)
	}
}

// TestSuccessorNotAChain checks that Successor refuses a p that describes
// no Markov chain (it used to return the inverse regardless): a row
// summing to more than 1, a negative entry, on the dense, banded and CSR
// paths. Rows summing to less than 1 (mass lost where episodes end) stay
// accepted.
func TestSuccessorNotAChain(t *testing.T) {
	over := mat.NewDense(2, 2, []float64{0.5, 0.5, 0.7, 0.6}) // row 1 sums to 1.3
	neg := mat.NewDense(2, 2, []float64{1.2, -0.2, 0.5, 0.5}) // row 0 sums to 1
	csrOver, err := linalg.CSRFromDense(over)
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name string
		p    mat.Matrix
		row  int
		neg  bool
	}{
		{"row sum 1.3", over, 1, false},
		{"negative entry", neg, 0, true},
		{"row sum 1.3, CSR", csrOver, 1, false},
		{"twice the identity, banded", scaledEye(100, 2), 0, false},
		{"just above the tolerance", mat.NewDense(1, 1, []float64{1 + 2*linalg.SubstochasticTol}), 0, false},
	} {
		var m mat.Dense
		err := linalg.Successor(&m, tc.p, 0.5)
		var rse *linalg.RowSumError
		if !errors.Is(err, linalg.ErrNotStochastic) || !errors.As(err, &rse) || rse.Row != tc.row || rse.Neg != tc.neg {
			t.Errorf("%s: error %v, want a RowSumError of row %d (negative %v)", tc.name, err, tc.row, tc.neg)
		}
	}
	// Substochastic rows: the two-state chain whose state 1 ends the
	// episode (row of zeros) and state 0 stays with probability 1/2:
	// M = [[1/(1 - gamma/2), gamma/2/(1 - gamma/2)], [0, 1]], derived by
	// hand from M = I + gamma P M.
	sub := mat.NewDense(2, 2, []float64{0.5, 0.5, 0, 0})
	var m mat.Dense
	if err := linalg.Successor(&m, sub, 0.5); err != nil {
		t.Fatalf("substochastic: %v", err)
	}
	want := mat.NewDense(2, 2, []float64{1 / 0.75, 0.25 / 0.75, 0, 1})
	if !mat.EqualApprox(&m, want, testtol.Exact) {
		t.Errorf("substochastic: M = %v, want %v", mat.Formatted(&m), mat.Formatted(want))
	}
	var m1 mat.Dense
	if err := linalg.Successor(&m1, mat.NewDense(1, 1, []float64{1 + linalg.SubstochasticTol/2}), 0.5); err != nil {
		t.Errorf("a row within the tolerance: %v", err)
	}
}

func scaledEye(n int, v float64) *mat.Dense {
	d := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		d.Set(i, i, v)
	}
	return d
}

func constant(n int, v float64) *mat.Dense {
	d := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			d.Set(i, j, v)
		}
	}
	return d
}

func TestCheckStochastic(t *testing.T) {
	good := mat.NewDense(2, 2, []float64{0.5, 0.5, 0, 1})
	cases := []struct {
		name string
		p    mat.Matrix
		tol  float64
		want error
		row  int
	}{
		{"good", good, 1e-12, nil, 0},
		{"good csr", linalg.GridWalk(3, 4), 1e-12, nil, 0},
		{"empty", &linalg.CSR{}, 1e-12, nil, 0},
		{"negative", mat.NewDense(2, 2, []float64{1, 0, -0.1, 1.1}), 1e-12, linalg.ErrNotStochastic, 1},
		{"sum", mat.NewDense(2, 2, []float64{0.5, 0.5, 0.5, 0.6}), 1e-12, linalg.ErrNotStochastic, 1},
		{"sum within tol", mat.NewDense(2, 2, []float64{0.5, 0.5, 0.5, 0.5 + 1e-10}), 1e-9, nil, 0},
		{"NaN", mat.NewDense(2, 2, []float64{math.NaN(), 1, 0.5, 0.5}), 1e-12, linalg.ErrNonFinite, 0},
		{"not square", mat.NewDense(2, 3, nil), 1e-12, linalg.ErrDimension, 0},
		{"transpose view", mat.NewDense(2, 2, []float64{0.5, 0.5, 0.5, 0.5}).T(), 0, nil, 0},
	}
	for _, c := range cases {
		err := linalg.CheckStochastic(c.p, c.tol)
		if !errors.Is(err, c.want) || (c.want == nil) != (err == nil) {
			t.Errorf("%s: got %v, want %v", c.name, err, c.want)
		}
		var rs *linalg.RowSumError
		if errors.As(err, &rs) && rs.Row != c.row {
			t.Errorf("%s: row %d, want %d", c.name, rs.Row, c.row)
		}
	}
}
