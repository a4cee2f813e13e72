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

// Drunkard's Walk: Grinstead & Snell, Introduction to Probability, ch. 11,
// Example 11.13. States 0..4, absorbing at 0 and 4; transient states 1, 2, 3
// step left or right with probability 1/2.
var (
	drunkQ = mat.NewDense(3, 3, []float64{
		0, 0.5, 0,
		0.5, 0, 0.5,
		0, 0.5, 0,
	})
	drunkR = mat.NewDense(3, 2, []float64{
		0.5, 0,
		0, 0,
		0, 0.5,
	})
)

func TestFundamentalDrunkardsWalk(t *testing.T) {
	// Grinstead & Snell, Example 11.13: N = [[3/2,1,1/2],[1,2,1],[1/2,1,3/2]].
	wantN := mat.NewDense(3, 3, []float64{1.5, 1, 0.5, 1, 2, 1, 0.5, 1, 1.5})
	// Grinstead & Snell, Example 11.13 (continued): t = N 1 = (3, 4, 3).
	wantT := []float64{3, 4, 3}
	// Grinstead & Snell, Example 11.13 (continued): B = N R.
	wantB := mat.NewDense(3, 2, []float64{0.75, 0.25, 0.5, 0.5, 0.25, 0.75})
	for _, q := range []mat.Matrix{drunkQ, mustCSR(drunkQ)} {
		var n mat.Dense
		if err := linalg.Fundamental(&n, q); err != nil {
			t.Fatal(err)
		}
		if !mat.EqualApprox(&n, wantN, testtol.Exact) {
			t.Errorf("N = %v, want %v", mat.Formatted(&n), mat.Formatted(wantN))
		}
		for i := 0; i < 3; i++ {
			if got := mat.Sum(n.RowView(i)); math.Abs(got-wantT[i]) > testtol.Exact {
				t.Errorf("t[%d] = %v, want %v", i, got, wantT[i])
			}
		}
		var b mat.Dense
		b.Mul(&n, drunkR)
		if !mat.EqualApprox(&b, wantB, testtol.Exact) {
			t.Errorf("B = %v, want %v", mat.Formatted(&b), mat.Formatted(wantB))
		}
	}
}

func mustCSR(m mat.Matrix) *linalg.CSR {
	c, err := linalg.CSRFromDense(m)
	if err != nil {
		panic(err)
	}
	return c
}

func TestFundamentalErrors(t *testing.T) {
	cases := []struct {
		name string
		dst  *mat.Dense
		q    mat.Matrix
		want error
	}{
		// States 0 and 1 swap forever; state 2 leaks but 0 and 1 never reach it.
		{"closed class", &mat.Dense{}, mat.NewDense(3, 3, []float64{0, 1, 0, 1, 0, 0, 0.5, 0, 0}), linalg.ErrNotAbsorbing},
		// A self-loop of probability 1 is a closed class of one state.
		{"trap", &mat.Dense{}, mat.NewDense(2, 2, []float64{1, 0, 0.5, 0}), linalg.ErrNotAbsorbing},
		{"row sum above 1", &mat.Dense{}, mat.NewDense(2, 2, []float64{0.5, 0.6, 0, 0}), linalg.ErrNotStochastic},
		{"negative", &mat.Dense{}, mat.NewDense(2, 2, []float64{-0.5, 0.6, 0, 0}), linalg.ErrNotStochastic},
		{"NaN", &mat.Dense{}, mat.NewDense(2, 2, []float64{math.NaN(), 0, 0, 0}), linalg.ErrNonFinite},
		{"not square", &mat.Dense{}, mat.NewDense(2, 3, nil), linalg.ErrDimension},
		{"dst shape", mat.NewDense(2, 2, nil), drunkQ, linalg.ErrDimension},
	}
	for _, c := range cases {
		if err := linalg.Fundamental(c.dst, c.q); !errors.Is(err, c.want) {
			t.Errorf("%s: got %v, want %v", c.name, err, c.want)
		}
	}
}

// TestFundamentalProperties checks (I - Q) N = I and N >= 0 on seeded
// random absorbing chains (a random sub-stochastic Q whose rows leak).
func TestFundamentalProperties(t *testing.T) {
	for seed := uint64(0); seed < 30; seed++ {
		rnd := rand.New(rand.NewPCG(seed, 3))
		n := 1 + rnd.IntN(25)
		q := randStochastic(n, 0.6, rnd)
		// Scale each row to keep mass 1 - leak, leak in [0.01, 0.5].
		for i := 0; i < n; i++ {
			row := q.RawRowView(i)
			f := 1 - (0.01 + 0.49*rnd.Float64())
			for j := range row {
				row[j] *= f
			}
		}
		var nm mat.Dense
		if err := linalg.Fundamental(&nm, q); err != nil {
			t.Fatalf("seed %d: %v", seed, err)
		}
		var prod mat.Dense
		prod.Mul(shifted(q, 1), &nm)
		for i := 0; i < n; i++ {
			prod.Set(i, i, prod.At(i, i)-1)
			for j := 0; j < n; j++ {
				if nm.At(i, j) < -testtol.Exact {
					t.Errorf("seed %d: N[%d][%d] = %v negative", seed, i, j, nm.At(i, j))
				}
			}
		}
		if d := mat.Norm(&prod, math.Inf(1)); d > 1e-10 {
			t.Errorf("seed %d: ||(I-Q)N - I|| = %.3g", seed, d)
		}
	}
}

func TestStationaryLandOfOz(t *testing.T) {
	// Grinstead & Snell, ch. 11, Example 11.1 (Land of Oz: rain, nice, snow).
	p := mat.NewDense(3, 3, []float64{
		0.5, 0.25, 0.25,
		0.5, 0, 0.5,
		0.25, 0.25, 0.5,
	})
	// Grinstead & Snell, Examples 11.19-11.20: w = (.4, .2, .4).
	want := []float64{0.4, 0.2, 0.4}
	for _, m := range []mat.Matrix{p, mustCSR(p)} {
		var pi mat.VecDense
		if err := linalg.Stationary(&pi, m); err != nil {
			t.Fatal(err)
		}
		for i, w := range want {
			if math.Abs(pi.AtVec(i)-w) > testtol.Exact {
				t.Errorf("pi = %v, want %v", mat.Formatted(pi.T()), want)
				break
			}
		}
	}
}

// TestStationaryProperties checks pi P = pi, pi > 0, sum 1 on seeded random
// irreducible chains (dense, sparse and grid; a grid walk is doubly
// stochastic, so its pi is uniform: derived by hand, 1^T P = 1^T), and
// compares with gonum's LU solve of the system with one balance equation
// replaced by the normalisation.
func TestStationaryProperties(t *testing.T) {
	for seed := uint64(0); seed < 40; seed++ {
		rnd := rand.New(rand.NewPCG(seed, 4))
		var p mat.Matrix
		uniform := false
		switch seed % 3 {
		case 0:
			p = randStochastic(1+rnd.IntN(20), 0, rnd) // all entries positive: irreducible
		case 1:
			// A ring plus random chords is irreducible.
			n := 2 + rnd.IntN(40)
			var tr []linalg.Triplet
			for i := 0; i < n; i++ {
				tr = append(tr, linalg.Triplet{Row: i, Col: (i + 1) % n, Val: 0.5})
				tr = append(tr, linalg.Triplet{Row: i, Col: rnd.IntN(n), Val: 0.5})
			}
			c, err := linalg.CSRFromTriplets(n, n, tr)
			if err != nil {
				t.Fatal(err)
			}
			p = c
		case 2:
			p = linalg.GridWalk(1+rnd.IntN(6), 1+rnd.IntN(9))
			uniform = true
		}
		n, _ := p.Dims()
		var pi mat.VecDense
		if err := linalg.Stationary(&pi, p); err != nil {
			t.Fatalf("seed %d: %v", seed, err)
		}
		var back mat.VecDense
		back.MulVec(p.T(), &pi)
		back.SubVec(&back, &pi)
		if d := mat.Norm(&back, math.Inf(1)); d > testtol.Exact {
			t.Errorf("seed %d: ||pi P - pi|| = %.3g", seed, d)
		}
		if s := mat.Sum(&pi); math.Abs(s-1) > testtol.Exact {
			t.Errorf("seed %d: sum pi = %v", seed, s)
		}
		// Reference: gonum LU on (P^T - I) with the last row set to ones.
		a := mat.DenseCopyOf(p.T())
		for i := 0; i < n; i++ {
			a.Set(i, i, a.At(i, i)-1)
			a.Set(n-1, i, 1)
		}
		e := mat.NewVecDense(n, nil)
		e.SetVec(n-1, 1)
		var ref mat.VecDense
		if err := ref.SolveVec(a, e); err != nil {
			t.Fatalf("seed %d: reference: %v", seed, err)
		}
		for i := 0; i < n; i++ {
			if pi.AtVec(i) <= 0 {
				t.Errorf("seed %d: pi[%d] = %v not positive", seed, i, pi.AtVec(i))
			}
			if math.Abs(pi.AtVec(i)-ref.AtVec(i)) > 1e-10 {
				t.Errorf("seed %d: pi[%d] = %v, gonum %v", seed, i, pi.AtVec(i), ref.AtVec(i))
			}
			if uniform && math.Abs(pi.AtVec(i)-1/float64(n)) > testtol.Exact {
				t.Errorf("seed %d: grid pi[%d] = %v, want 1/n", seed, i, pi.AtVec(i))
			}
		}
	}
}

func TestStationaryErrors(t *testing.T) {
	cases := []struct {
		name string
		dst  *mat.VecDense
		p    mat.Matrix
		want error
	}{
		{"two classes", &mat.VecDense{}, mat.NewDense(2, 2, []float64{1, 0, 0, 1}), linalg.ErrReducible},
		{"absorbing", &mat.VecDense{}, mat.NewDense(2, 2, []float64{0.5, 0.5, 0, 1}), linalg.ErrReducible},
		{"not stochastic", &mat.VecDense{}, mat.NewDense(2, 2, []float64{0.5, 0.6, 0.5, 0.5}), linalg.ErrNotStochastic},
		{"NaN", &mat.VecDense{}, mat.NewDense(2, 2, []float64{0.5, math.NaN(), 0.5, 0.5}), linalg.ErrNonFinite},
		{"not square", &mat.VecDense{}, mat.NewDense(2, 3, nil), linalg.ErrDimension},
		{"empty", &mat.VecDense{}, &linalg.CSR{}, linalg.ErrDimension},
		{"dst length", mat.NewVecDense(3, nil), linalg.GridWalk(2, 2), linalg.ErrDimension},
	}
	for _, c := range cases {
		if err := linalg.Stationary(c.dst, c.p); !errors.Is(err, c.want) {
			t.Errorf("%s: got %v, want %v", c.name, err, c.want)
		}
	}
}

// TestExplicitZerosOutsideBand: explicit zeros stored in a CSR do not count
// for the band; the walk on a 1 x 40 line is doubly stochastic, so its
// stationary vector is uniform (derived by hand: 1^T P = 1^T).
func TestExplicitZerosOutsideBand(t *testing.T) {
	line := linalg.GridWalk(1, 40)
	var tr []linalg.Triplet
	for i := 0; i < 40; i++ {
		ind, val := line.Row(i)
		for k, j := range ind {
			tr = append(tr, linalg.Triplet{Row: i, Col: j, Val: val[k]})
		}
	}
	tr = append(tr, linalg.Triplet{Row: 0, Col: 30, Val: 0}, linalg.Triplet{Row: 35, Col: 2, Val: 0})
	p, err := linalg.CSRFromTriplets(40, 40, tr)
	if err != nil {
		t.Fatal(err)
	}
	var pi mat.VecDense
	if err := linalg.Stationary(&pi, p); err != nil {
		t.Fatal(err)
	}
	for i := 0; i < 40; i++ {
		if math.Abs(pi.AtVec(i)-1.0/40) > testtol.Exact {
			t.Fatalf("pi[%d] = %v, want 1/40", i, pi.AtVec(i))
		}
	}
	b := randDense(40, 2, rand.New(rand.NewPCG(1, 1)))
	var x mat.Dense
	if err := linalg.SolveSuccessor(&x, p, 0.9, b); err != nil {
		t.Fatal(err)
	}
	if d := maxRelDiff(&x, gonumSolve(line, 0.9, b)); d > testtol.Solve {
		t.Errorf("solve differs from gonum LU by %.3g", d)
	}
}
