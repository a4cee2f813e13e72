package linalg

import (
	"fmt"
	"math"
	"runtime"
	"sort"
	"sync"
)

// IterMethod selects the Krylov method of the iterative solver.
type IterMethod int

const (
	// IterAuto uses IterCG when P is symmetric (then I - gamma P is
	// symmetric positive definite for a stochastic P) and IterBiCGSTAB
	// otherwise. It falls back to BiCGSTAB if CG meets a non-positive
	// curvature, and to IterGMRES if BiCGSTAB breaks down a third time
	// (after two restarts with new shadow residuals).
	IterAuto IterMethod = iota
	// IterCG is the preconditioned conjugate gradient method, for
	// symmetric positive definite I - gamma P.
	IterCG
	// IterBiCGSTAB is van der Vorst's stabilised bi-conjugate gradient
	// method, for any P. On a breakdown it restarts from the current
	// iterate with a new pseudo-random shadow residual.
	IterBiCGSTAB
	// IterGMRES is restarted GMRES(m) with modified Gram-Schmidt, for any
	// non-singular I - gamma P. It cannot break down before it reaches the
	// solution, but it keeps m + 1 vectors of length n (see
	// IterConfig.Restart).
	IterGMRES
)

// String returns the method's name.
func (m IterMethod) String() string {
	switch m {
	case IterAuto:
		return "auto"
	case IterCG:
		return "cg"
	case IterBiCGSTAB:
		return "bicgstab"
	case IterGMRES:
		return "gmres"
	}
	return fmt.Sprintf("IterMethod(%d)", int(m))
}

// IterConfig configures the iterative solver. The zero value (or nil)
// means the documented defaults.
type IterConfig struct {
	// Tol is the relative residual ||b - (I - gamma P) x|| / ||b|| (2-norm)
	// at which the solver stops. 0 means 1e-8.
	Tol float64
	// MaxIter bounds the iterations (one iteration is one product with P
	// for CG and GMRES, two for BiCGSTAB), summed over the methods used.
	// 0 means 10000.
	MaxIter int
	// UseInitial, if true, takes the initial guess x0 from dst (a warm
	// start); otherwise x0 = 0.
	UseInitial bool
	// Method selects the Krylov method; the zero value is IterAuto.
	Method IterMethod
	// Precond selects the preconditioner; the zero value is PrecondAuto.
	Precond Precond
	// Workers is the number of goroutines sharing each product and vector
	// update. 0 means min(2, GOMAXPROCS) when P has at least 1<<17 rows,
	// and 1 below that, where synchronisation costs more than it saves.
	// For SolveIterativeMulti it is the number of columns solved at once
	// (0 means min(2, GOMAXPROCS, columns)), each solved on one goroutine.
	Workers int
	// Restart is the restart length m of GMRES(m), the number of
	// iterations between restarts; GMRES keeps m + 1 basis vectors of
	// length n. 0 means 30; values above n mean n (full GMRES), and values
	// above MaxRestart mean MaxRestart, which bounds the basis to
	// MaxRestart + 1 vectors. It
	// matters only when GMRES runs (IterGMRES, or IterAuto after BiCGSTAB
	// broke down). Restarted GMRES can stagnate on strongly indefinite
	// matrices, where a larger m helps.
	Restart int
}

// IterResult reports what the iterative solver achieved.
type IterResult struct {
	Iterations int        // iterations taken
	Residual   float64    // achieved relative residual ||b - A x|| / ||b||, recomputed from x
	Method     IterMethod // method used last (IterCG, IterBiCGSTAB or IterGMRES)
	Precond    Precond    // preconditioner used (PrecondSGS or PrecondJacobi)
	Breakdowns int        // breakdowns met and recovered from by a restart or a change of method
}

// NotConvergedError is returned by the iterative solver when it stops
// before the relative residual reaches the tolerance. It wraps
// ErrNotConverged. The solution vector then holds the last iterate.
type NotConvergedError struct {
	Iterations int     // iterations taken
	Residual   float64 // relative residual of the last iterate (may be NaN after a breakdown)
	Tol        float64 // the tolerance asked for
}

// Error returns the message, with the residual reached, the iterations
// and the tolerance.
func (e *NotConvergedError) Error() string {
	return fmt.Sprintf("linalg: iterative: relative residual %.3g after %d iterations, want %.3g: %v",
		e.Residual, e.Iterations, e.Tol, ErrNotConverged)
}

// Unwrap returns ErrNotConverged.
func (e *NotConvergedError) Unwrap() error { return ErrNotConverged }

// SolveIterative solves (I - gamma P) x = b for a square CSR P and gamma in
// [0, 1), writing x into dst (len n). It allocates its workspace on every
// call; use an IterSolver to reuse it. See IterSolver.Solve for the method,
// the stopping rule and the errors.
func SolveIterative(dst []float64, p *CSR, gamma float64, b []float64, s *IterConfig) (IterResult, error) {
	var is IterSolver
	defer is.release()
	return is.Solve(dst, p, gamma, b, s)
}

// IterSolver solves (I - gamma P) x = b iteratively and keeps its workspace
// between calls, so repeated solves of the same size allocate nothing when
// they run on one goroutine (Workers = 1, or the default below 1<<17 rows).
// It also keeps an int32 copy of the row pointers and column indices of the
// last P, reused while the same *CSR comes back (a CSR must not be modified
// once built). The zero value is ready to use. An IterSolver must not be
// used by several goroutines at once.
type IterSolver struct {
	n     int
	p     *CSR
	gamma float64
	sgs   bool
	x, b  []float64 // caller's solution (y during the iteration) and b

	d    []float64 // diagonal of A = I - gamma P
	dinv []float64 // 1/d (1 where d is not positive)
	w    []float64 // preconditioning weights: dinv (Jacobi) or d (SGS)
	dpos []int32   // offset in row i of its first entry with column >= i
	// ptr32 and ind32 are int32 copies of P's row pointers and column
	// indices: they halve the index traffic of the memory-bound kernels.
	ptr32, ind32                  []int32
	idxFor                        *CSR      // the matrix ptr32 and ind32 were built for
	t                             []float64 // SGS intermediate
	r, rhat, pv, q, v, phat, shat []float64

	// GMRES(m): the basis V (m + 1 vectors of n, one after the other),
	// the Hessenberg matrix (column j at hess[j(m+1):]), the Givens
	// rotations and the rotated right-hand side (then the coefficients).
	basis, hess, cs, sn, gv []float64

	// Arguments of the block kernels, set by the caller of forBlocks:
	// the scalars of the current step; the vectors of op, scaleW and mgs;
	// fuseDir, which makes sweepUpper first set opSrc = w r + beta opSrc
	// (the CG direction); and gk, the basis vectors gmresUpdate combines.
	alpha, beta, omega  float64
	opDst, opSrc, opDot []float64
	fuseDir             bool
	gk                  int

	// Row blocks: block k is rows bounds[k] to bounds[k+1]-1; part[k]
	// holds its partial sums during forBlocks.
	bounds []int
	part   [][2]float64
}

// iterStatus is how a Krylov run ended.
type iterStatus int

const (
	stConverged iterStatus = iota // the recurrence residual met the target
	stMaxIter                     // MaxIter reached
	stBreakdown                   // an inner product or curvature that the method divides by vanished
	stNonFinite                   // a non-finite residual
)

func grow(s []float64, n int) []float64 {
	if cap(s) < n {
		return make([]float64, n)
	}
	return s[:n]
}

// Solve solves (I - gamma P) x = b for a square CSR P and gamma in [0, 1),
// writing x into dst (len n), and returns the iterations taken and the
// achieved relative residual. P need not be stochastic.
//
// Method. With A = I - gamma P = L + D + U (strictly lower, diagonal,
// strictly upper) and symmetric Gauss-Seidel preconditioning, the solver
// iterates on the split system
//
//	K y = (D + L)^-1 b,  K = (D + L)^-1 A (D + U)^-1,  x = (D + U)^-1 y,
//
// applying K by Eisenstat's trick, K v = t + (D + L)^-1 (v - D t) with
// t = (D + U)^-1 v (Eisenstat 1981, SIAM J. Sci. Stat. Comput. 2(1)), which
// costs one pass over P. With several workers, L and U keep only the
// entries inside each worker's row block and the coupling entries E between
// blocks join the correction, K v = t + (D + L)^-1 (v - D t + E t) (block
// symmetric Gauss-Seidel), so the blocks are swept in parallel; the
// iteration count then depends slightly on Workers, the answer only within
// the tolerance. For a symmetric P, K is symmetric positive definite (when
// A is) and conjugate gradients with the weights D apply (IterCG);
// otherwise BiCGSTAB (van der Vorst 1992, SIAM J. Sci. Stat. Comput.
// 13(2)). With Jacobi preconditioning K = A and the weights are D^-1.
//
// For a symmetric stochastic P the eigenvalues of A lie in
// [1 - gamma, 1 + gamma], so Jacobi-preconditioned CG needs about
// sqrt((1+gamma)/(1-gamma)) ln(2/Tol)/2 iterations (Saad 2003, Iterative
// Methods for Sparse Linear Systems, Theorem 6.29); symmetric Gauss-Seidel
// cuts that by about 2.5 on grid chains (35 to 40 instead of 93 iterations
// on a 1000 x 1000 grid at gamma = 0.99, Tol = 1e-6). Each iteration costs
// O(nnz(P) + n); the workspace is 6 vectors of n float64, one of n int32
// and an int32 copy of P's indices (n + 1 + nnz int32) for CG, 4 more
// float64 vectors for BiCGSTAB, m + 2 more for GMRES(m) (IterGMRES, or
// IterAuto after a fallback; m = Restart). A GMRES(m) iteration adds
// about k + 2 vector passes for the Gram-Schmidt step with the k-th basis
// vector, so it is the cheaper iteration only for small k.
//
// Breakdowns. BiCGSTAB divides by rho = rhat.r, rhat.v and t.t, with
// omega = t.s/t.t; it has broken down when rho, rhat.v or t.s falls below
// 1e-14 times the norms of its two factors (omega ~ 0 freezes every later
// step). This can happen in exact arithmetic: when the shadow residual
// rhat = r0 is a left eigenvector of K, the shadow Krylov space is
// span{r0}, and r1, orthogonal to it, gives rho = 0 at the second
// iteration. A unit b = e_k whose row k of P is zero (in a state-action
// chain, a pair whose move ends the episode) does this with Jacobi
// preconditioning, K^T e_k = e_k, and often with SGS. The solver then
// restarts BiCGSTAB from the current x with a pseudo-random shadow
// residual (PCG with fixed seeds, so the same inputs give the same bits).
// With IterAuto, a third breakdown hands over to restarted GMRES(m) (Saad
// & Schultz 1986, SIAM J. Sci. Stat. Comput. 7(3)), which cannot break
// down short of the solution for a non-singular A; a diverging BiCGSTAB
// (as on random indefinite matrices) also ends in breakdowns, since rho
// shrinks relative to the growing residual. Any restart whose iterate is
// worse than x = 0 (relative residual above 1) starts from 0. GMRES is
// only the fallback: near gamma = 1 restarted GMRES needs many more
// iterations (5000 to 7100 for GMRES(30) with SGS against 590 to 700 for
// BiCGSTAB on the 4200-unknown state-action walk at gamma = 0.99999).
// Under IterAuto a non-positive curvature in CG hands over to BiCGSTAB.
// IterResult.Breakdowns counts the breakdowns met.
//
// Stopping rule: the solver stops when the recurrence residual r of the
// split system satisfies c ||r|| <= Tol ||b||, where c >= 1 bounds
// ||D + L||_2 (since b - A x = (D + L) r), so that the true relative
// residual ||b - A x|| / ||b|| is below Tol up to rounding. It then
// recomputes the true residual from x and, if that misses the tolerance,
// restarts from x (at most three times, within MaxIter). The reported
// Residual is always the true relative residual of the returned x.
//
// Errors wrap ErrDiscount (gamma outside [0, 1)), ErrDimension (P not
// square, or len(dst) or len(b) not n), ErrNonFinite (NaN or Inf in P, b or,
// with UseInitial, dst), ErrSingular (PrecondSGS asked for while a diagonal
// entry of A is not positive), ErrConfig (an unknown Method or
// Precond), or ErrNotConverged as a *NotConvergedError when MaxIter is
// reached, CG (not under IterAuto) or GMRES breaks down, or the residual
// is no longer finite; dst then holds the last iterate. If b = 0, x = 0 is
// returned at once.
func (s *IterSolver) Solve(dst []float64, p *CSR, gamma float64, b []float64, set *IterConfig) (IterResult, error) {
	var cfg IterConfig
	if set != nil {
		cfg = *set
	}
	if cfg.Tol <= 0 || math.IsNaN(cfg.Tol) {
		cfg.Tol = 1e-8
	}
	if cfg.MaxIter <= 0 {
		cfg.MaxIter = 10000
	}
	if !(gamma >= 0 && gamma < 1) {
		return IterResult{}, fmt.Errorf("linalg: iterative: gamma %v outside [0, 1): %w", gamma, ErrDiscount)
	}
	if cfg.Method < IterAuto || cfg.Method > IterGMRES || cfg.Precond < PrecondAuto || cfg.Precond > PrecondJacobi {
		return IterResult{}, fmt.Errorf("linalg: iterative: unknown method %v or preconditioner %v: %w", cfg.Method, cfg.Precond, ErrConfig)
	}
	n, c := p.Dims()
	if n != c {
		return IterResult{}, fmt.Errorf("linalg: iterative: p is %dx%d, not square: %w", n, c, ErrDimension)
	}
	if len(dst) != n || len(b) != n {
		return IterResult{}, fmt.Errorf("linalg: iterative: len(dst) = %d, len(b) = %d, want %d: %w", len(dst), len(b), n, ErrDimension)
	}
	var bb float64
	for i, v := range b {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return IterResult{}, fmt.Errorf("linalg: iterative: b[%d]: %w", i, ErrNonFinite)
		}
		bb += v * v
	}
	if cfg.UseInitial {
		for i, v := range dst {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return IterResult{}, fmt.Errorf("linalg: iterative: initial x[%d]: %w", i, ErrNonFinite)
			}
		}
	}
	s.n, s.p, s.gamma, s.x, s.b = n, p, gamma, dst, b
	defer func() { s.p, s.x, s.b, s.opDst, s.opSrc, s.opDot = nil, nil, nil, nil, nil, nil }()
	s.d = grow(s.d, n)
	s.dinv = grow(s.dinv, n)
	sym, posDiag, dominant, err := s.scan(cfg.Method == IterAuto)
	if err != nil {
		return IterResult{}, err
	}
	if bb == 0 {
		clear(dst)
		return IterResult{Method: IterCG, Precond: PrecondJacobi}, nil
	}
	if !cfg.UseInitial {
		clear(dst)
	}
	method := cfg.Method
	if method == IterAuto {
		method = IterBiCGSTAB
		if sym {
			method = IterCG
		}
	}
	pre := cfg.Precond
	if pre == PrecondAuto {
		pre = PrecondJacobi
		if posDiag && dominant {
			pre = PrecondSGS
		}
	}
	s.sgs = pre == PrecondSGS
	if s.sgs && !posDiag {
		return IterResult{}, fmt.Errorf("linalg: iterative: sgs preconditioner needs a positive diagonal of I - gamma P: %w", ErrSingular)
	}
	for i, d := range s.d {
		if d > 0 {
			s.dinv[i] = 1 / d
		} else {
			s.dinv[i] = 1
		}
	}
	s.w = s.dinv
	if s.sgs {
		s.w = s.d
	}
	s.r = grow(s.r, n)
	s.pv = grow(s.pv, n)
	s.q = grow(s.q, n)
	if s.sgs {
		s.t = grow(s.t, n)
	}
	if err := s.compactIndices(); err != nil {
		return IterResult{}, err
	}
	s.splitRows(cfg.Workers)
	if s.sgs {
		s.diagPositions()
	}

	bnorm := math.Sqrt(bb)
	target := cfg.Tol * bnorm
	if s.sgs {
		target /= s.lowerNorm()
	}
	res := IterResult{Method: method, Precond: pre}
	restart := cfg.Restart
	if restart <= 0 {
		restart = defaultRestart
	}
	restart = min(restart, n, MaxRestart)
	warm := cfg.UseInitial
	shadow := 0 // BiCGSTAB shadow residual: 0 is r0, k > 0 the k-th pseudo-random one
	checks := 0 // runs whose recurrence residual met the target but the true one did not
	for {
		if warm && s.sgs {
			s.forBlocks((*IterSolver).toY)
		}
		var st iterStatus
		switch method {
		case IterCG:
			st = s.cg(&res, target, cfg.MaxIter, warm)
		case IterBiCGSTAB:
			st = s.bicgstab(&res, target, cfg.MaxIter, warm, shadow)
		default:
			st = s.gmres(&res, target, cfg.MaxIter, restart, warm)
		}
		if s.sgs {
			s.forBlocks((*IterSolver).toX)
		}
		warm = true
		rr := s.forBlocks((*IterSolver).residual)[0]
		res.Residual = math.Sqrt(rr) / bnorm
		if res.Residual <= cfg.Tol {
			return res, nil
		}
		fail := res.Iterations >= cfg.MaxIter || math.IsNaN(res.Residual) || math.IsInf(res.Residual, 0)
		switch st {
		case stConverged:
			// Rounding in the recurrence: continue from x, at most three
			// times.
			checks++
			fail = fail || checks > 3
		case stBreakdown:
			res.Breakdowns++
			switch {
			case method == IterCG && cfg.Method == IterAuto:
				// Non-positive curvature: P is symmetric but K is not
				// positive definite. Continue with BiCGSTAB from here.
				method = IterBiCGSTAB
			case method == IterBiCGSTAB:
				// A Lanczos (rho) or pivot (rhat.v) breakdown, or omega
				// near 0: restart from x with a new shadow residual; in
				// Auto, after maxBreakdowns hand over to GMRES.
				shadow++
				if cfg.Method == IterAuto && shadow >= maxBreakdowns {
					method = IterGMRES
				}
			default:
				fail = true
			}
		default:
			fail = true
		}
		if fail {
			return res, &NotConvergedError{Iterations: res.Iterations, Residual: res.Residual, Tol: cfg.Tol}
		}
		if res.Residual > 1 {
			// The iterate is worse than x = 0 (a diverging BiCGSTAB
			// before its breakdown): start the next run from 0.
			clear(dst)
		}
		res.Method = method
	}
}

// scan fills d, checks P for non-finite values, reports whether every
// d[i] is positive, whether A = I - gamma P is diagonally dominant by rows
// (|d[i]| >= gamma sum_{j != i} |P[i][j]|, up to rounding) and, if want,
// whether P is symmetric.
func (s *IterSolver) scan(want bool) (sym, posDiag, dominant bool, err error) {
	p, g := s.p, s.gamma
	sym, posDiag, dominant = want, true, true
	var lower, upper int
	for i := 0; i < s.n; i++ {
		ind, val := p.Row(i)
		d := 1.0
		var off float64
		for k, j := range ind {
			v := val[k]
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return false, false, false, fmt.Errorf("linalg: iterative: p row %d: %w", i, ErrNonFinite)
			}
			if j != i {
				off += math.Abs(v)
			}
			switch {
			case j == i:
				d -= g * v
			case j > i:
				upper++
			case sym:
				lower++
				// Look for (j, i) with the same value.
				jind, jval := p.Row(j)
				t := sort.SearchInts(jind, i)
				if t == len(jind) || jind[t] != i || jval[t] != v {
					sym = false
				}
			}
		}
		s.d[i] = d
		if !(d > 0) {
			posDiag = false
		}
		if math.Abs(d) < g*off*(1-1e-12) {
			dominant = false
		}
	}
	// Every lower entry has an equal upper partner; the counts must agree
	// for the upper entries to have lower partners.
	return sym && lower == upper, posDiag, dominant, nil
}

// compactIndices fills ptr32 and ind32, unless they are already built for
// this matrix (a CSR is read-only once built).
func (s *IterSolver) compactIndices() error {
	p := s.p
	nnz := p.Ptr[s.n]
	if nnz > math.MaxInt32 || s.n > math.MaxInt32 {
		return fmt.Errorf("linalg: iterative: %d rows, %d entries: more than 2^31-1: %w", s.n, nnz, ErrDimension)
	}
	if s.idxFor == p && len(s.ptr32) == s.n+1 && len(s.ind32) == nnz {
		return nil
	}
	s.idxFor = nil
	if cap(s.ptr32) < s.n+1 {
		s.ptr32 = make([]int32, s.n+1)
	}
	if cap(s.ind32) < nnz {
		s.ind32 = make([]int32, nnz)
	}
	s.ptr32, s.ind32 = s.ptr32[:s.n+1], s.ind32[:nnz]
	for i, v := range p.Ptr[:s.n+1] {
		s.ptr32[i] = int32(v)
	}
	for k, v := range p.Ind[:nnz] {
		s.ind32[k] = int32(v)
	}
	s.idxFor = p
	return nil
}

// A blockKernel runs one step of the solver over the rows lo to hi-1 (a
// row block) and returns its partial sums (inner products), if any. The
// kernels are the methods of IterSolver with this signature, passed as
// method expressions such as (*IterSolver).residual; their other
// arguments are fields of the IterSolver.
type blockKernel func(s *IterSolver, lo, hi int) [2]float64

// parallelRows is the number of rows from which the default Workers uses
// two goroutines.
const parallelRows = 1 << 17

// splitRows splits the rows into one block per worker, of about equal work
// (stored entries plus rows).
func (s *IterSolver) splitRows(workers int) {
	if workers <= 0 {
		workers = 1
		if s.n >= parallelRows {
			workers = min(2, runtime.GOMAXPROCS(0))
		}
	}
	workers = max(1, min(workers, s.n))
	if cap(s.bounds) < workers+1 {
		s.bounds = make([]int, workers+1)
		s.part = make([][2]float64, workers)
	}
	s.bounds = s.bounds[:workers+1]
	s.part = s.part[:workers]
	nnz := s.p.Ptr[s.n]
	s.bounds[0] = 0
	for w := 1; w < workers; w++ {
		goal := (nnz + s.n) * w / workers
		lo, hi := s.bounds[w-1], s.n
		for lo < hi { // first row i with Ptr[i] + i >= goal
			mid := int(uint(lo+hi) >> 1)
			if s.p.Ptr[mid]+mid < goal {
				lo = mid + 1
			} else {
				hi = mid
			}
		}
		s.bounds[w] = lo
	}
	s.bounds[workers] = s.n
}

// forBlocks runs k over every row block and returns the sums of the
// blocks' partial sums, added in block order so that the bits do not
// depend on scheduling. With one block k runs on the caller's goroutine;
// with more, blocks 1, 2, ... each run on a goroutine started for this
// call (fork-join) while the caller runs block 0.
func (s *IterSolver) forBlocks(k blockKernel) [2]float64 {
	nb := len(s.bounds) - 1
	if nb == 1 {
		return k(s, 0, s.n)
	}
	var wg sync.WaitGroup
	for b := 1; b < nb; b++ {
		wg.Go(func() { s.part[b] = k(s, s.bounds[b], s.bounds[b+1]) })
	}
	o := k(s, s.bounds[0], s.bounds[1])
	wg.Wait()
	for _, q := range s.part[1:] {
		o[0] += q[0]
		o[1] += q[1]
	}
	return o
}

// residual sets r = b - A x (the true residual of x) and returns r.r.
func (s *IterSolver) residual(lo, hi int) (o [2]float64) {
	p, g := s.p, s.gamma
	ptr, ind, val := s.ptr32, s.ind32, p.Val
	x, b, r := s.x, s.b[:hi], s.r[:hi]
	var rr float64
	for i := lo; i < hi; i++ {
		ri, rv := ind[ptr[i]:ptr[i+1]], val[ptr[i]:ptr[i+1]]
		rv = rv[:len(ri)]
		var sum float64
		for t, j := range ri {
			sum += rv[t] * x[j]
		}
		v := b[i] - (x[i] - g*sum)
		r[i] = v
		rr += v * v
	}
	o[0] = rr
	return o
}

// initR sets r = r - q (r holds bh, q holds K y) and returns r.r and r.w r.
func (s *IterSolver) initR(lo, hi int) (o [2]float64) {
	r, q, w := s.r[:hi], s.q[:hi], s.w[:hi]
	var rr, rz float64
	for i := lo; i < hi; i++ {
		v := r[i] - q[i]
		r[i] = v
		rr += v * v
		rz += v * v * w[i]
	}
	o[0], o[1] = rr, rz
	return o
}

// release drops the workspace.
func (s *IterSolver) release() { *s = IterSolver{} }
