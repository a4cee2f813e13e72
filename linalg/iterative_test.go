package linalg_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/linalg"
)

// TestIterativeAgainstDense checks the iterative solver against gonum's
// dense LU on seeded random sparse chains (non-symmetric: BiCGSTAB) and grid
// walks (symmetric: CG), for every method and preconditioner.
//
// Tolerance: the solver guarantees ||b - A x|| <= Tol ||b||, and for any
// non-singular A, ||x - x*|| / ||x*|| <= kappa_2(A) ||b - A x|| / ||b||
// (Golub & Van Loan, Matrix Computations, 4th ed., §2.6.2, from memory). For
// a symmetric stochastic P, kappa_2(I - gamma P) <= (1 + gamma)/(1 - gamma)
// since the eigenvalues lie in [1 - gamma, 1 + gamma]; in general we compute
// kappa_2 with gonum (mat.Cond, by SVD). We allow 2 kappa_2 Tol, the 2
// covering rounding in the reference solve.
func TestIterativeAgainstDense(t *testing.T) {
	rnd := rand.New(rand.NewPCG(11, 12))
	chains := []struct {
		name string
		p    *linalg.CSR
		sym  bool
	}{
		{"grid 12x17", linalg.GridWalk(12, 17), true},
		{"grid 1x40", linalg.GridWalk(1, 40), true},
		{"random sparse 150", randSparseChain(150, 4, rnd), false},
		{"random sparse 300 deg 2", randSparseChain(300, 2, rnd), false},
	}
	type setting struct {
		m  linalg.IterMethod
		pc linalg.Precond
	}
	settings := []setting{
		{linalg.IterAuto, linalg.PrecondAuto},
		{linalg.IterBiCGSTAB, linalg.PrecondSGS},
		{linalg.IterBiCGSTAB, linalg.PrecondJacobi},
		{linalg.IterCG, linalg.PrecondSGS},
		{linalg.IterCG, linalg.PrecondJacobi},
		{linalg.IterGMRES, linalg.PrecondSGS},
		{linalg.IterGMRES, linalg.PrecondJacobi},
	}
	const tol = 1e-9
	for _, c := range chains {
		n, _ := c.p.Dims()
		for _, gamma := range []float64{0.5, 0.9, 0.99, 0.999} {
			a := shifted(c.p, gamma)
			kappa := mat.Cond(a, 2)
			if c.sym && kappa > (1+gamma)/(1-gamma)*(1+1e-9) {
				t.Errorf("%s: kappa %v above the bound (1+gamma)/(1-gamma)", c.name, kappa)
			}
			b := randVec(n, rnd)
			want := gonumSolve(c.p, gamma, mat.NewDense(n, 1, b))
			for _, s := range settings {
				if s.m == linalg.IterCG && !c.sym {
					continue
				}
				for _, workers := range []int{1, 2} {
					x := make([]float64, n)
					res, err := linalg.SolveIterative(x, c.p, gamma, b, &linalg.IterConfig{
						Tol: tol, Method: s.m, Precond: s.pc, Workers: workers, Restart: 10 * workers,
					})
					if err != nil {
						t.Errorf("%s gamma %v %v/%v: %v", c.name, gamma, s.m, s.pc, err)
						continue
					}
					if res.Residual > tol {
						t.Errorf("%s: reported residual %v above tol", c.name, res.Residual)
					}
					if s.m == linalg.IterAuto && c.sym != (res.Method == linalg.IterCG) {
						t.Errorf("%s: auto chose %v", c.name, res.Method)
					}
					var diff, ref float64
					for i := range x {
						diff += (x[i] - want.At(i, 0)) * (x[i] - want.At(i, 0))
						ref += want.At(i, 0) * want.At(i, 0)
					}
					if rel := math.Sqrt(diff / ref); rel > 2*kappa*tol {
						t.Errorf("%s gamma %v %v/%v workers %d: relative error %.3g above 2 kappa tol = %.3g",
							c.name, gamma, s.m, s.pc, workers, rel, 2*kappa*tol)
					}
					// The reported residual is the true one.
					r := trueResidual(c.p, gamma, x, b)
					if math.Abs(r-res.Residual) > 1e-3*r+1e-15 {
						t.Errorf("%s: reported residual %v, true %v", c.name, res.Residual, r)
					}
				}
			}
		}
	}
}

func trueResidual(p *linalg.CSR, gamma float64, x, b []float64) float64 {
	n := len(x)
	px := make([]float64, n)
	p.MulVecTo(px, x)
	r := make([]float64, n)
	for i := range r {
		r[i] = b[i] - (x[i] - gamma*px[i])
	}
	return norm2(r) / norm2(b)
}

func TestIterativeWarmStart(t *testing.T) {
	p := linalg.GridWalk(15, 15)
	rnd := rand.New(rand.NewPCG(3, 3))
	b := randVec(225, rnd)
	x := make([]float64, 225)
	cold, err := linalg.SolveIterative(x, p, 0.99, b, &linalg.IterConfig{Tol: 1e-6})
	if err != nil {
		t.Fatal(err)
	}
	// From the solution itself no iteration is needed.
	again, err := linalg.SolveIterative(x, p, 0.99, b, &linalg.IterConfig{Tol: 1e-6, UseInitial: true})
	if err != nil {
		t.Fatal(err)
	}
	if again.Iterations != 0 {
		t.Errorf("warm start at the solution took %d iterations", again.Iterations)
	}
	// Tightening from there needs fewer iterations than from zero.
	tight, err := linalg.SolveIterative(x, p, 0.99, b, &linalg.IterConfig{Tol: 1e-10, UseInitial: true})
	if err != nil {
		t.Fatal(err)
	}
	y := make([]float64, 225)
	full, err := linalg.SolveIterative(y, p, 0.99, b, &linalg.IterConfig{Tol: 1e-10})
	if err != nil {
		t.Fatal(err)
	}
	if tight.Iterations >= full.Iterations {
		t.Errorf("warm %d iterations, cold %d (cold 1e-6 took %d)", tight.Iterations, full.Iterations, cold.Iterations)
	}
	// A zero right-hand side gives x = 0 at once, whatever x0.
	zero := make([]float64, 225)
	res, err := linalg.SolveIterative(x, p, 0.99, zero, &linalg.IterConfig{UseInitial: true})
	if err != nil || res.Iterations != 0 || norm2(x) != 0 {
		t.Errorf("b = 0: %v %v |x| = %v", res, err, norm2(x))
	}
}

func TestIterativeNotConverged(t *testing.T) {
	p := linalg.GridWalk(20, 20)
	b := randVec(400, rand.New(rand.NewPCG(5, 5)))
	x := make([]float64, 400)
	for _, m := range []linalg.IterMethod{linalg.IterCG, linalg.IterBiCGSTAB, linalg.IterGMRES} {
		res, err := linalg.SolveIterative(x, p, 0.999, b, &linalg.IterConfig{Tol: 1e-14, MaxIter: 2, Method: m})
		if !errors.Is(err, linalg.ErrNotConverged) {
			t.Fatalf("%v: got %v", m, err)
		}
		var nc *linalg.NotConvergedError
		if !errors.As(err, &nc) {
			t.Fatalf("%v: not a *NotConvergedError: %T", m, err)
		}
		r := trueResidual(p, 0.999, x, b)
		if nc.Iterations != 2 || nc.Tol != 1e-14 || math.Abs(nc.Residual-r) > 1e-6*r || nc.Residual != res.Residual {
			t.Errorf("%v: error %+v, true residual %v, result %+v", m, nc, r, res)
		}
	}
}

func TestIterativeErrors(t *testing.T) {
	p := linalg.GridWalk(2, 3)
	bad := linalg.GridWalk(2, 3)
	bad.Val[2] = math.NaN() // fields are exported; the solver checks anyway
	ns, err := linalg.CSRFromTriplets(2, 3, nil)
	if err != nil {
		t.Fatal(err)
	}
	nanVec := []float64{1, 2, 3, math.NaN(), 5, 6}
	cases := []struct {
		name  string
		dst   []float64
		p     *linalg.CSR
		gamma float64
		b     []float64
		s     *linalg.IterConfig
		want  error
	}{
		{"gamma one", make([]float64, 6), p, 1, make([]float64, 6), nil, linalg.ErrDiscount},
		{"gamma NaN", make([]float64, 6), p, math.NaN(), make([]float64, 6), nil, linalg.ErrDiscount},
		{"not square", make([]float64, 2), ns, 0.5, make([]float64, 2), nil, linalg.ErrDimension},
		{"dst length", make([]float64, 5), p, 0.5, make([]float64, 6), nil, linalg.ErrDimension},
		{"b length", make([]float64, 6), p, 0.5, make([]float64, 7), nil, linalg.ErrDimension},
		{"NaN in b", make([]float64, 6), p, 0.5, nanVec, nil, linalg.ErrNonFinite},
		{"NaN in x0", append([]float64(nil), nanVec...), p, 0.5, make([]float64, 6), &linalg.IterConfig{UseInitial: true}, linalg.ErrNonFinite},
		{"NaN in p", make([]float64, 6), bad, 0.5, make([]float64, 6), nil, linalg.ErrNonFinite},
		// SGS needs a positive diagonal of I - gamma P: 1 - 0.5*4 < 0.
		{"sgs on bad diagonal", make([]float64, 1), mustCSR(mat.NewDense(1, 1, []float64{4})), 0.5, []float64{1}, &linalg.IterConfig{Precond: linalg.PrecondSGS}, linalg.ErrSingular},
		{"unknown method", make([]float64, 6), p, 0.5, make([]float64, 6), &linalg.IterConfig{Method: linalg.IterGMRES + 1}, linalg.ErrConfig},
		{"unknown precond", make([]float64, 6), p, 0.5, make([]float64, 6), &linalg.IterConfig{Precond: linalg.PrecondJacobi + 1}, linalg.ErrConfig},
	}
	for _, c := range cases {
		if _, err := linalg.SolveIterative(c.dst, c.p, c.gamma, c.b, c.s); !errors.Is(err, c.want) {
			t.Errorf("%s: got %v, want %v", c.name, err, c.want)
		}
	}
}

// TestIterativeGeneralMatrix: P need not be stochastic. With p = [[4]] and
// gamma = 0.5, (1 - 2) x = 3 gives x = -3 (derived by hand); the diagonal is
// negative, so Auto picks Jacobi.
func TestIterativeGeneralMatrix(t *testing.T) {
	x := make([]float64, 1)
	res, err := linalg.SolveIterative(x, mustCSR(mat.NewDense(1, 1, []float64{4})), 0.5, []float64{3}, nil)
	if err != nil || math.Abs(x[0]+3) > 1e-12 || res.Precond != linalg.PrecondJacobi {
		t.Errorf("x = %v, %+v, %v; want -3", x, res, err)
	}
}

func TestIterSolverAllocs(t *testing.T) {
	p := linalg.GridWalk(30, 30)
	b := randVec(900, rand.New(rand.NewPCG(1, 1)))
	x := make([]float64, 900)
	var s linalg.IterSolver
	set := &linalg.IterConfig{Tol: 1e-8, Workers: 1}
	if _, err := s.Solve(x, p, 0.95, b, set); err != nil {
		t.Fatal(err)
	}
	allocs := testing.AllocsPerRun(5, func() {
		if _, err := s.Solve(x, p, 0.95, b, set); err != nil {
			t.Fatal(err)
		}
	})
	if allocs != 0 {
		t.Errorf("IterSolver.Solve allocates %v times per call", allocs)
	}
}

func TestSolveIterativeMulti(t *testing.T) {
	rnd := rand.New(rand.NewPCG(9, 9))
	for _, p := range []*linalg.CSR{linalg.GridWalk(9, 11), randSparseChain(120, 3, rnd)} {
		n, _ := p.Dims()
		b := randDense(n, 5, rnd)
		set := &linalg.IterConfig{Tol: 1e-10}
		var x1, x2 mat.Dense
		res, err := linalg.SolveIterativeMulti(&x1, p, 0.95, b, &linalg.IterConfig{Tol: 1e-10, Workers: 1})
		if err != nil {
			t.Fatal(err)
		}
		if _, err := linalg.SolveIterativeMulti(&x2, p, 0.95, b, set); err != nil {
			t.Fatal(err)
		}
		// Columns are independent serial solves: same bits for any worker count.
		if !mat.Equal(&x1, &x2) {
			t.Error("results depend on the number of workers")
		}
		if len(res) != 5 {
			t.Fatalf("%d results", len(res))
		}
		for j := 0; j < 5; j++ {
			col := mat.Col(nil, j, b)
			x := make([]float64, n)
			r, err := linalg.SolveIterative(x, p, 0.95, col, set)
			if err != nil {
				t.Fatal(err)
			}
			if r != res[j] || !floatsEqual(x, mat.Col(nil, j, &x1)) {
				t.Errorf("column %d: multi %+v, single %+v", j, res[j], r)
			}
		}
		want := gonumSolve(p, 0.95, b)
		if d := maxRelDiff(&x1, want); d > 1e-7 {
			t.Errorf("multi differs from gonum LU by %.3g", d)
		}
	}
	// Errors.
	p := linalg.GridWalk(3, 3)
	if _, err := linalg.SolveIterativeMulti(&mat.Dense{}, p, 1, mat.NewDense(9, 2, nil), nil); !errors.Is(err, linalg.ErrDiscount) {
		t.Errorf("gamma 1: %v", err)
	}
	if _, err := linalg.SolveIterativeMulti(mat.NewDense(9, 3, nil), p, 0.5, mat.NewDense(9, 2, nil), nil); !errors.Is(err, linalg.ErrDimension) {
		t.Errorf("dst shape: %v", err)
	}
	b := mat.NewDense(9, 2, nil)
	b.Set(4, 1, math.Inf(1))
	if _, err := linalg.SolveIterativeMulti(&mat.Dense{}, p, 0.5, b, nil); !errors.Is(err, linalg.ErrNonFinite) {
		t.Errorf("Inf in b: %v", err)
	}
	_, err := linalg.SolveIterativeMulti(&mat.Dense{}, linalg.GridWalk(10, 10), 0.999, randDense(100, 3, rnd), &linalg.IterConfig{Tol: 1e-15, MaxIter: 1})
	var nc *linalg.NotConvergedError
	if !errors.As(err, &nc) {
		t.Errorf("not converged: %v", err)
	}
}

func floatsEqual(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// TestIterativeIndefinite: a symmetric P whose I - gamma P is indefinite
// (a path graph with weights 1.5, so the eigenvalues of gamma P reach
// +-2.7 cos(pi/51), derived by hand) is not a case for CG, nor for
// Gauss-Seidel (not diagonally dominant); Auto picks Jacobi, starts with CG,
// meets non-positive curvature and finishes with BiCGSTAB, and the answer
// agrees with gonum's LU within 2 kappa tol.
func TestIterativeIndefinite(t *testing.T) {
	const n = 50
	var tr []linalg.Triplet
	for i := 0; i+1 < n; i++ {
		tr = append(tr, linalg.Triplet{Row: i, Col: i + 1, Val: 1.5}, linalg.Triplet{Row: i + 1, Col: i, Val: 1.5})
	}
	p, err := linalg.CSRFromTriplets(n, n, tr)
	if err != nil {
		t.Fatal(err)
	}
	b := randVec(n, rand.New(rand.NewPCG(8, 8)))
	x := make([]float64, n)
	const tol = 1e-10
	res, err := linalg.SolveIterative(x, p, 0.9, b, &linalg.IterConfig{Tol: tol})
	if err != nil {
		t.Fatal(err)
	}
	if res.Method != linalg.IterBiCGSTAB || res.Precond != linalg.PrecondJacobi || res.Breakdowns != 1 {
		t.Errorf("finished with %v/%v after %d breakdowns, want bicgstab/jacobi after 1 (CG's curvature)", res.Method, res.Precond, res.Breakdowns)
	}
	want := gonumSolve(p, 0.9, mat.NewDense(n, 1, b))
	kappa := mat.Cond(shifted(p, 0.9), 2)
	var diff, ref float64
	for i := range x {
		diff += (x[i] - want.At(i, 0)) * (x[i] - want.At(i, 0))
		ref += want.At(i, 0) * want.At(i, 0)
	}
	if rel := math.Sqrt(diff / ref); rel > 2*kappa*tol {
		t.Errorf("relative error %.3g above %.3g", rel, 2*kappa*tol)
	}
}

// TestIterativeProperties: on many seeded random chains (sparse
// non-symmetric, symmetrised, grids) and discounts, the iterative solution
// meets its tolerance on the true residual and agrees with SolveSuccessor
// within 2 (1+gamma)/(1-gamma) tol: for a stochastic P,
// ||A||_inf <= 1 + gamma and ||A^-1||_inf <= 1/(1 - gamma) (derived by hand
// from the Neumann series), so the infinity-norm condition number is at most
// (1+gamma)/(1-gamma), and the 2-norm residual bounds the infinity-norm one
// up to sqrt(n), which we also allow.
func TestIterativeProperties(t *testing.T) {
	const tol = 1e-9
	for seed := uint64(0); seed < 40; seed++ {
		rnd := rand.New(rand.NewPCG(seed, 41))
		var p *linalg.CSR
		switch seed % 3 {
		case 0:
			p = randSparseChain(2+rnd.IntN(200), 1+rnd.IntN(5), rnd)
		case 1:
			// (Pi + Pi^T)/2 for a random permutation matrix Pi: symmetric
			// and stochastic (derived by hand: rows and columns of Pi and
			// Pi^T each hold a single 1).
			m := 1 + rnd.IntN(150)
			perm := rnd.Perm(m)
			var tr []linalg.Triplet
			for i, j := range perm {
				tr = append(tr, linalg.Triplet{Row: i, Col: j, Val: 0.5}, linalg.Triplet{Row: j, Col: i, Val: 0.5})
			}
			var err error
			if p, err = linalg.CSRFromTriplets(m, m, tr); err != nil {
				t.Fatal(err)
			}
		case 2:
			p = linalg.GridWalk(1+rnd.IntN(20), 1+rnd.IntN(20))
		}
		n, _ := p.Dims()
		gamma := rnd.Float64() * 0.999
		b := randVec(n, rnd)
		x := make([]float64, n)
		res, err := linalg.SolveIterative(x, p, gamma, b, &linalg.IterConfig{Tol: tol, Workers: 1 + int(seed%2)})
		if err != nil {
			t.Fatalf("seed %d: %v", seed, err)
		}
		if r := trueResidual(p, gamma, x, b); r > tol || math.Abs(r-res.Residual) > 1e-3*r+1e-15 {
			t.Errorf("seed %d: true residual %v, reported %v", seed, r, res.Residual)
		}
		var want mat.Dense
		if err := linalg.SolveSuccessor(&want, p, gamma, mat.NewDense(n, 1, b)); err != nil {
			t.Fatal(err)
		}
		var diff, ref float64
		for i := range x {
			diff = max(diff, math.Abs(x[i]-want.At(i, 0)))
			ref = max(ref, math.Abs(want.At(i, 0)))
		}
		bound := 2 * (1 + gamma) / (1 - gamma) * tol * math.Sqrt(float64(n))
		if diff > bound*ref {
			t.Errorf("seed %d n=%d gamma=%.3f: max error %.3g, bound %.3g", seed, n, gamma, diff/ref, bound)
		}
	}
}

// TestIterSolverReuse: one IterSolver over different chains of the same
// size, sizes that shrink and grow, and both methods gives the same bits as
// fresh solvers (the cached workspace and index copy never leak between
// calls).
func TestIterSolverReuse(t *testing.T) {
	rnd := rand.New(rand.NewPCG(13, 13))
	chains := []*linalg.CSR{
		linalg.GridWalk(10, 10),
		randSparseChain(100, 3, rnd),
		linalg.GridWalk(5, 7),
		randSparseChain(300, 4, rnd),
		linalg.GridWalk(10, 10),
	}
	var s linalg.IterSolver
	for k, p := range chains {
		n, _ := p.Dims()
		b := randVec(n, rnd)
		x1, x2 := make([]float64, n), make([]float64, n)
		r1, err1 := s.Solve(x1, p, 0.97, b, nil)
		r2, err2 := linalg.SolveIterative(x2, p, 0.97, b, nil)
		if err1 != nil || err2 != nil || r1 != r2 || !floatsEqual(x1, x2) {
			t.Errorf("chain %d: reused %+v %v, fresh %+v %v", k, r1, err1, r2, err2)
		}
	}
}
