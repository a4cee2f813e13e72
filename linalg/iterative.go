package linalg

import (
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"sort"
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
	// IterSettings.Restart).
	IterGMRES
)

// Precond selects the preconditioner of the iterative solver.
type Precond int

const (
	// PrecondAuto uses PrecondSGS when I - gamma P is diagonally dominant
	// by rows with a positive diagonal (always so for a sub-stochastic P
	// and gamma < 1) and PrecondJacobi otherwise, since the triangular
	// solves of Gauss-Seidel can amplify errors exponentially on a
	// matrix far from dominance.
	PrecondAuto Precond = iota
	// PrecondSGS is symmetric Gauss-Seidel, M = (D + L) D^-1 (D + U) for
	// A = L + D + U, applied by Eisenstat's trick so that one preconditioned
	// product costs about one product with P. With several workers it is
	// block symmetric Gauss-Seidel over the workers' row blocks.
	PrecondSGS
	// PrecondJacobi is the diagonal preconditioner M = D (entries of D that
	// are not positive are replaced by 1).
	PrecondJacobi
)

// String returns the preconditioner's name.
func (p Precond) String() string {
	switch p {
	case PrecondAuto:
		return "auto"
	case PrecondSGS:
		return "sgs"
	case PrecondJacobi:
		return "jacobi"
	}
	return fmt.Sprintf("Precond(%d)", int(p))
}

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

// IterSettings configures the iterative solver. The zero value (or nil)
// means the documented defaults.
type IterSettings struct {
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
	// length n. 0 means 30; values above n mean n (full GMRES). It
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
func SolveIterative(dst []float64, p *CSR, gamma float64, b []float64, s *IterSettings) (IterResult, error) {
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
	gk                      int // basis vectors combined by kGMRESUpdate

	alpha, beta, omega  float64
	fuseDir             bool // kOp1 first sets opSrc = w r + beta opSrc (CG)
	opDst, opSrc, opDot []float64

	// parallel team
	nw     int
	bounds []int
	req    []chan int
	done   chan struct{}
	out    [][4]float64
}

// Kernels run by the team over row blocks.
const (
	kResidual     = iota // r = b - A x (true residual); r.r
	kOp1                 // SGS: t = (D + U_b)^-1 opSrc
	kOp2                 // opDst = K opSrc; opDst.opDot, opDst.opDst
	kRHS                 // r = bh = (D + L_b)^-1 b (SGS) or b
	kToX                 // x = (D + U_b)^-1 y in place (SGS)
	kToY                 // y = (D + U_b) x in place (SGS)
	kInitR               // r = r - q (r holds bh); r.r, r.w r
	kCGDir               // p = w r + beta p
	kCGUpdate            // y += alpha p; r -= alpha q; r.w r, r.r
	kBiDir               // p = r + beta (p - omega v); phat = w p
	kBiS                 // s = r - alpha v (s in q); shat = w s; s.s
	kBiUpdate            // y += alpha phat + omega shat; r = s - omega t (t in r); rhat.r, r.r
	kBiUpdateHalf        // y += alpha phat
	kScaleW              // opDst = alpha opSrc; phat = w opDst
	kMGS                 // opDst -= alpha opSrc; opDst.opDot (if opDot != nil), opDst.opDst
	kGMRESUpdate         // y += w (V[:, :gk] gv[:gk]) (pv as scratch)
)

// iterStatus is how a Krylov run ended.
type iterStatus int

const (
	stConverged iterStatus = iota // the recurrence residual met the target
	stMaxIter                     // MaxIter reached
	stBreakdown                   // an inner product or curvature that the method divides by vanished
	stNonFinite                   // a non-finite residual
)

// breakTol is the cosine below which BiCGSTAB treats one of its inner
// products (rhat.r for rho, rhat.v for alpha, t.s for omega) as a
// breakdown: the quantity is then pure rounding noise relative to the
// norms of its factors (a relative error of about 1e-16/breakTol).
const breakTol = 1e-14

// maxBreakdowns is the number of BiCGSTAB breakdowns (the first with
// rhat = r0, then with pseudo-random shadows) after which IterAuto hands
// over to GMRES. A diverging BiCGSTAB ends in breakdowns too: rho shrinks
// relative to the growing residual.
const maxBreakdowns = 3

// defaultRestart is GMRES's restart length m when IterSettings.Restart is 0.
const defaultRestart = 30

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
func (s *IterSolver) Solve(dst []float64, p *CSR, gamma float64, b []float64, set *IterSettings) (IterResult, error) {
	var cfg IterSettings
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
	s.startTeam(cfg.Workers)
	defer s.stopTeam()
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
	restart = min(restart, n)
	warm := cfg.UseInitial
	shadow := 0 // BiCGSTAB shadow residual: 0 is r0, k > 0 the k-th pseudo-random one
	checks := 0 // runs whose recurrence residual met the target but the true one did not
	for {
		if warm && s.sgs {
			s.run(kToY)
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
			s.run(kToX)
		}
		warm = true
		rr := s.run(kResidual)[0]
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

// diagPositions fills dpos.
func (s *IterSolver) diagPositions() {
	if cap(s.dpos) < s.n {
		s.dpos = make([]int32, s.n)
	}
	s.dpos = s.dpos[:s.n]
	for i := 0; i < s.n; i++ {
		ind, _ := s.p.Row(i)
		s.dpos[i] = int32(sort.SearchInts(ind, i))
	}
}

// lowerNorm returns sqrt(||D + L_b||_1 ||D + L_b||_inf), a bound on the
// 2-norm of D + L_b (the block lower triangle used by SGS).
func (s *IterSolver) lowerNorm() float64 {
	if cap(s.t) < s.n {
		s.t = make([]float64, s.n)
	}
	col := s.t[:s.n] // column sums; t is overwritten before use
	clear(col)
	var rowMax float64
	for w := 0; w < s.nw; w++ {
		lo, hi := s.bounds[w], s.bounds[w+1]
		for i := lo; i < hi; i++ {
			ind, val := s.p.Row(i)
			sum := math.Abs(s.d[i])
			col[i] += sum
			for k, j := range ind[:s.dpos[i]] {
				if j >= lo {
					a := s.gamma * math.Abs(val[k])
					sum += a
					col[j] += a
				}
			}
			rowMax = max(rowMax, sum)
		}
	}
	var colMax float64
	for _, v := range col {
		colMax = max(colMax, v)
	}
	return max(1, math.Sqrt(rowMax*colMax))
}

// op sets dst = K src and returns dst.dot and dst.dst.
func (s *IterSolver) op(dst, src, dot []float64) (float64, float64) {
	s.opDst, s.opSrc, s.opDot = dst, src, dot
	if s.sgs {
		s.run(kOp1)
	}
	o := s.run(kOp2)
	return o[0], o[1]
}

// cg runs conjugate gradients on K y = bh with weights w from the current y
// (zero unless warm). A non-positive curvature p.K p is a breakdown.
func (s *IterSolver) cg(res *IterResult, target float64, maxIter int, warm bool) iterStatus {
	s.fuseDir = false
	defer func() { s.fuseDir = false }()
	if warm {
		s.op(s.q, s.x, s.q)
	} else {
		clear(s.q)
	}
	s.run(kRHS)
	o := s.run(kInitR)
	rr, rz := o[0], o[1]
	if math.Sqrt(rr) <= target {
		return stConverged
	}
	s.beta = 0
	s.run(kCGDir)
	for res.Iterations < maxIter {
		res.Iterations++
		pq, _ := s.op(s.q, s.pv, s.pv)
		s.fuseDir = false
		if !(pq > 0) {
			if math.IsNaN(pq) {
				return stNonFinite
			}
			return stBreakdown
		}
		s.alpha = rz / pq
		o := s.run(kCGUpdate)
		rzNew, rrNew := o[0], o[1]
		if math.Sqrt(rrNew) <= target {
			return stConverged
		}
		if math.IsNaN(rrNew) || math.IsInf(rrNew, 0) {
			return stNonFinite
		}
		s.beta = rzNew / rz
		rz = rzNew
		if s.sgs {
			s.fuseDir = true // done by the next product's first sweep
		} else {
			s.run(kCGDir)
		}
	}
	return stMaxIter
}

// bicgstab runs right-preconditioned BiCGSTAB (van der Vorst 1992,
// Algorithm Bi-CGSTAB) on K y = bh with weights w from the current y. The
// shadow residual rhat is r0 when shadow is 0 and otherwise the shadow-th
// pseudo-random vector (see randomShadow). It reports a breakdown when
// rho = rhat.r, rhat.v or t.s (whose ratio is omega) falls below breakTol
// times the norms of its two factors; y then holds the last iterate
// (including the alpha step when omega broke down).
func (s *IterSolver) bicgstab(res *IterResult, target float64, maxIter int, warm bool, shadow int) iterStatus {
	n := s.n
	s.rhat = grow(s.rhat, n)
	s.v = grow(s.v, n)
	s.phat = grow(s.phat, n)
	s.shat = grow(s.shat, n)
	if warm {
		s.op(s.q, s.x, s.q)
	} else {
		clear(s.q)
	}
	s.run(kRHS)
	rr := s.run(kInitR)[0]
	if math.Sqrt(rr) <= target {
		return stConverged
	}
	if math.IsNaN(rr) || math.IsInf(rr, 0) {
		return stNonFinite
	}
	var rhoNew, rhatNorm float64
	if shadow == 0 {
		copy(s.rhat, s.r)
		rhoNew, rhatNorm = rr, math.Sqrt(rr)
	} else {
		rhoNew, rhatNorm = s.randomShadow(shadow)
	}
	clear(s.pv)
	clear(s.v)
	rho, alpha, omega := 1.0, 1.0, 1.0
	for res.Iterations < maxIter {
		res.Iterations++
		if !(math.Abs(rhoNew) > breakTol*rhatNorm*math.Sqrt(rr)) {
			return stBreakdown
		}
		s.beta = (rhoNew / rho) * (alpha / omega)
		s.omega = omega
		rho = rhoNew
		s.run(kBiDir)
		rv, vv := s.op(s.v, s.phat, s.rhat)
		if math.IsNaN(rv) || math.IsInf(vv, 0) {
			return stNonFinite
		}
		if !(math.Abs(rv) > breakTol*rhatNorm*math.Sqrt(vv)) {
			return stBreakdown
		}
		alpha = rho / rv
		s.alpha = alpha
		ss := s.run(kBiS)[0]
		if math.Sqrt(ss) <= target {
			s.run(kBiUpdateHalf)
			return stConverged
		}
		// t = K shat, stored in r (r is rebuilt from s and t below).
		ts, tt := s.op(s.r, s.shat, s.q)
		if math.IsNaN(ts) || math.IsInf(tt, 0) {
			return stNonFinite
		}
		if !(math.Abs(ts) > breakTol*math.Sqrt(tt*ss)) {
			// omega ~ 0 would stall every later step: keep the alpha
			// step and restart.
			s.run(kBiUpdateHalf)
			return stBreakdown
		}
		omega = ts / tt
		s.omega = omega
		o := s.run(kBiUpdate)
		rhoNew, rr = o[0], o[1]
		if math.Sqrt(rr) <= target {
			return stConverged
		}
		if math.IsNaN(rr) || math.IsInf(rr, 0) {
			return stNonFinite
		}
	}
	return stMaxIter
}

// randomShadow fills rhat with the k-th pseudo-random shadow residual,
// entries uniform in [-1, 1) from a PCG generator seeded by k (the same
// bits on every call and machine), and returns rhat.r and ||rhat||.
func (s *IterSolver) randomShadow(k int) (rho, norm float64) {
	var g rand.PCG
	g.Seed(0x5eed5eed, uint64(k))
	var nn float64
	r := s.r[:len(s.rhat)]
	for i := range s.rhat {
		v := float64(g.Uint64()>>11)*0x1p-52 - 1
		s.rhat[i] = v
		rho += v * r[i]
		nn += v * v
	}
	return rho, math.Sqrt(nn)
}

// gmres runs restarted GMRES(m) (Saad & Schultz 1986, SIAM J. Sci. Stat.
// Comput. 7(3); Saad 2003, Algorithm 6.9) on K W z = bh, y = W z, with W the
// diagonal weights w (right preconditioning), from the current y. The
// Arnoldi basis is orthogonalised by modified Gram-Schmidt, each axpy
// fused with the next inner product, and the least-squares problem is
// solved by Givens rotations, whose running residual |g[k]| is
// ||bh - K y|| for the current iterate (in exact arithmetic). The
// residual is recomputed from y at each restart.
func (s *IterSolver) gmres(res *IterResult, target float64, maxIter, m int, warm bool) iterStatus {
	n := s.n
	s.basis = grow(s.basis, (m+1)*n)
	s.phat = grow(s.phat, n)
	s.hess = grow(s.hess, (m+1)*m)
	s.cs = grow(s.cs, m)
	s.sn = grow(s.sn, m)
	s.gv = grow(s.gv, m+1)
	vec := func(j int) []float64 { return s.basis[j*n : (j+1)*n] }
	hess, cs, sn, gv := s.hess, s.cs, s.sn, s.gv
	for {
		if warm {
			s.op(s.q, s.x, s.q)
		} else {
			clear(s.q)
		}
		warm = true
		s.run(kRHS)
		rr := s.run(kInitR)[0]
		beta := math.Sqrt(rr)
		if beta <= target {
			return stConverged
		}
		if math.IsNaN(beta) || math.IsInf(beta, 0) {
			return stNonFinite
		}
		if res.Iterations >= maxIter {
			return stMaxIter
		}
		s.opDst, s.opSrc, s.alpha = vec(0), s.r, 1/beta
		s.run(kScaleW) // v0 = r/beta, phat = w v0
		clear(gv)
		gv[0] = beta
		k, st := 0, stMaxIter
		for k < m && res.Iterations < maxIter {
			res.Iterations++
			h := hess[k*(m+1) : (k+1)*(m+1)]
			w := vec(k + 1)
			h0, ww := s.op(w, s.phat, vec(0))
			h[0] = h0
			for i := 0; i <= k; i++ {
				s.opDst, s.opSrc, s.opDot, s.alpha = w, vec(i), nil, h[i]
				if i < k {
					s.opDot = vec(i + 1)
				}
				o := s.run(kMGS)
				if i < k {
					h[i+1] = o[0]
				}
				ww = o[1]
			}
			hn := math.Sqrt(ww)
			h[k+1] = hn
			for i := 0; i < k; i++ {
				a, b := h[i], h[i+1]
				h[i], h[i+1] = cs[i]*a+sn[i]*b, -sn[i]*a+cs[i]*b
			}
			rot := math.Hypot(h[k], h[k+1])
			if math.IsNaN(rot) || math.IsInf(rot, 0) {
				st = stNonFinite
				break
			}
			if rot == 0 {
				// K W is singular on the Krylov space: drop column k.
				st = stBreakdown
				break
			}
			cs[k], sn[k] = h[k]/rot, h[k+1]/rot
			h[k], h[k+1] = rot, 0
			gv[k], gv[k+1] = cs[k]*gv[k], -sn[k]*gv[k]
			k++
			if math.Abs(gv[k]) <= target || hn == 0 {
				// Converged, or the Krylov space is invariant (the
				// solution lies in it: a lucky breakdown).
				st = stConverged
				break
			}
			s.opDst, s.opSrc, s.alpha = w, w, 1/hn
			s.run(kScaleW) // v_{k+1} = w/hn, phat = w v_{k+1}
		}
		// Solve the k x k triangular system H c = g, c into gv, and
		// update y += W V c.
		for i := k - 1; i >= 0; i-- {
			sum := gv[i]
			for j := i + 1; j < k; j++ {
				sum -= hess[j*(m+1)+i] * gv[j]
			}
			gv[i] = sum / hess[i*(m+1)+i]
		}
		s.gk = k
		s.opDot = nil
		if k > 0 {
			s.run(kGMRESUpdate)
		}
		if st != stMaxIter || res.Iterations >= maxIter {
			return st
		}
	}
}

// kernel runs kernel k over the rows of block w and returns its partial
// sums.
func (s *IterSolver) kernel(k, w int) (o [4]float64) {
	lo, hi := s.bounds[w], s.bounds[w+1]
	p, g := s.p, s.gamma
	ptr, ind, val := s.ptr32, s.ind32, p.Val
	switch k {
	case kResidual:
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
	case kOp1:
		// t = (D + U_b)^-1 src, backward over the block.
		t, src, dinv := s.t[:hi], s.opSrc[:hi], s.dinv[:hi]
		// With fuseDir, the CG direction src = w r + beta src is formed
		// row by row on the way (the sweeps read only row i of src).
		fuse, wt, r, beta := s.fuseDir, s.w[:hi], s.r[:hi], s.beta
		for i := hi - 1; i >= lo; i-- {
			a, e := int(ptr[i])+int(s.dpos[i]), int(ptr[i+1])
			if a < e && int(ind[a]) == i {
				a++
			}
			// Sum far columns first so that the dependence on t[i+1]
			// enters last.
			var sum float64
			for k := e - 1; k >= a; k-- {
				if j := int(ind[k]); j < hi {
					sum += val[k] * t[j]
				}
			}
			si := src[i]
			if fuse {
				si = wt[i]*r[i] + beta*si
				src[i] = si
			}
			t[i] = (si + g*sum) * dinv[i]
		}
	case kOp2:
		dst, src, dot := s.opDst[:hi], s.opSrc, s.opDot[:hi]
		var dd, d2 float64
		if !s.sgs {
			for i := lo; i < hi; i++ {
				ri, rv := ind[ptr[i]:ptr[i+1]], val[ptr[i]:ptr[i+1]]
				rv = rv[:len(ri)]
				var sum float64
				for t, j := range ri {
					sum += rv[t] * src[j]
				}
				v := src[i] - g*sum
				dst[i] = v
				dd += v * dot[i]
				d2 += v * v
			}
			o[0], o[1] = dd, d2
			return o
		}
		// dst = t + (D + L_b)^-1 (src - D t + E t), forward over the block;
		// the solved part is dst - t.
		t, d, dinv := s.t, s.d[:hi], s.dinv[:hi]
		for i := lo; i < hi; i++ {
			a, e := int(ptr[i]), int(ptr[i+1])
			m := a + int(s.dpos[i])
			var sumL, sumE float64
			for k := a; k < m; k++ {
				j := int(ind[k])
				if j < lo {
					sumE += val[k] * t[j]
				} else {
					sumL += val[k] * (dst[j] - t[j])
				}
			}
			for k := e - 1; k >= m; k-- {
				j := int(ind[k])
				if j < hi {
					break
				}
				sumE += val[k] * t[j]
			}
			ti := t[i]
			v := ti + (src[i]-d[i]*ti-g*sumE+g*sumL)*dinv[i]
			dst[i] = v
			dd += v * dot[i]
			d2 += v * v
		}
		o[0], o[1] = dd, d2
	case kRHS:
		bh, b := s.r[:hi], s.b[:hi]
		if !s.sgs {
			copy(bh[lo:hi], b[lo:hi])
			return o
		}
		dinv := s.dinv[:hi]
		for i := lo; i < hi; i++ {
			a := int(ptr[i])
			m := a + int(s.dpos[i])
			var sum float64
			for k := a; k < m; k++ {
				if j := int(ind[k]); j >= lo {
					sum += val[k] * bh[j]
				}
			}
			bh[i] = (b[i] + g*sum) * dinv[i]
		}
	case kToX:
		// x = (D + U_b)^-1 y in place, backward.
		x, dinv := s.x[:hi], s.dinv[:hi]
		for i := hi - 1; i >= lo; i-- {
			a, e := int(ptr[i])+int(s.dpos[i]), int(ptr[i+1])
			var sum float64
			for k := a; k < e; k++ {
				j := int(ind[k])
				if j >= hi {
					break
				}
				if j > i {
					sum += val[k] * x[j]
				}
			}
			x[i] = (x[i] + g*sum) * dinv[i]
		}
	case kToY:
		// y = (D + U_b) x in place, forward (x[j], j > i, still unchanged).
		x, d := s.x[:hi], s.d[:hi]
		for i := lo; i < hi; i++ {
			a, e := int(ptr[i])+int(s.dpos[i]), int(ptr[i+1])
			var sum float64
			for k := a; k < e; k++ {
				j := int(ind[k])
				if j >= hi {
					break
				}
				if j > i {
					sum += val[k] * x[j]
				}
			}
			x[i] = d[i]*x[i] - g*sum
		}
	case kInitR:
		r, q, w := s.r[:hi], s.q[:hi], s.w[:hi]
		var rr, rz float64
		for i := lo; i < hi; i++ {
			v := r[i] - q[i]
			r[i] = v
			rr += v * v
			rz += v * v * w[i]
		}
		o[0], o[1] = rr, rz
	case kCGDir:
		pv, r, w, beta := s.pv[:hi], s.r[:hi], s.w[:hi], s.beta
		for i := lo; i < hi; i++ {
			pv[i] = w[i]*r[i] + beta*pv[i]
		}
	case kCGUpdate:
		y, r, pv, q, w, a := s.x[:hi], s.r[:hi], s.pv[:hi], s.q[:hi], s.w[:hi], s.alpha
		var rz, rr float64
		for i := lo; i < hi; i++ {
			y[i] += a * pv[i]
			v := r[i] - a*q[i]
			r[i] = v
			rr += v * v
			rz += v * v * w[i]
		}
		o[0], o[1] = rz, rr
	case kBiDir:
		pv, r, v, ph, w, beta, om := s.pv[:hi], s.r[:hi], s.v[:hi], s.phat[:hi], s.w[:hi], s.beta, s.omega
		for i := lo; i < hi; i++ {
			t := r[i] + beta*(pv[i]-om*v[i])
			pv[i] = t
			ph[i] = w[i] * t
		}
	case kBiS:
		r, v, q, sh, w, a := s.r[:hi], s.v[:hi], s.q[:hi], s.shat[:hi], s.w[:hi], s.alpha
		var ss float64
		for i := lo; i < hi; i++ {
			t := r[i] - a*v[i]
			q[i] = t
			sh[i] = w[i] * t
			ss += t * t
		}
		o[0] = ss
	case kBiUpdate:
		y, ph, sh, r, q, rhat, a, om := s.x[:hi], s.phat[:hi], s.shat[:hi], s.r[:hi], s.q[:hi], s.rhat[:hi], s.alpha, s.omega
		var rhr, rr float64
		for i := lo; i < hi; i++ {
			y[i] += a*ph[i] + om*sh[i]
			t := q[i] - om*r[i] // r holds t here
			r[i] = t
			rhr += rhat[i] * t
			rr += t * t
		}
		o[0], o[1] = rhr, rr
	case kBiUpdateHalf:
		y, ph, a := s.x[:hi], s.phat[:hi], s.alpha
		for i := lo; i < hi; i++ {
			y[i] += a * ph[i]
		}
	case kScaleW:
		dst, src, ph, w, a := s.opDst[:hi], s.opSrc[:hi], s.phat[:hi], s.w[:hi], s.alpha
		for i := lo; i < hi; i++ {
			v := a * src[i]
			dst[i] = v
			ph[i] = w[i] * v
		}
	case kMGS:
		dst, src, a := s.opDst[:hi], s.opSrc[:hi], s.alpha
		var dd, d2 float64
		if s.opDot == nil {
			for i := lo; i < hi; i++ {
				v := dst[i] - a*src[i]
				dst[i] = v
				d2 += v * v
			}
		} else {
			dot := s.opDot[:hi]
			for i := lo; i < hi; i++ {
				v := dst[i] - a*src[i]
				dst[i] = v
				dd += v * dot[i]
				d2 += v * v
			}
		}
		o[0], o[1] = dd, d2
	case kGMRESUpdate:
		n := s.n
		y, w, tmp := s.x[:hi], s.w[:hi], s.pv[:hi]
		c := s.gv[:s.gk]
		v0 := s.basis[:n][:hi]
		for i := lo; i < hi; i++ {
			tmp[i] = c[0] * v0[i]
		}
		for j := 1; j < len(c); j++ {
			vj, cj := s.basis[j*n : (j+1)*n][:hi], c[j]
			for i := lo; i < hi; i++ {
				tmp[i] += cj * vj[i]
			}
		}
		for i := lo; i < hi; i++ {
			y[i] += w[i] * tmp[i]
		}
	}
	return o
}

// parallelRows is the number of rows from which the default Workers uses
// two goroutines.
const parallelRows = 1 << 17

// startTeam starts the helper goroutines and splits the rows into blocks
// of about equal work (stored entries plus rows).
func (s *IterSolver) startTeam(workers int) {
	if workers <= 0 {
		workers = 1
		if s.n >= parallelRows {
			workers = min(2, runtime.GOMAXPROCS(0))
		}
	}
	workers = max(1, min(workers, s.n))
	s.nw = workers
	if cap(s.bounds) < workers+1 {
		s.bounds = make([]int, workers+1)
		s.out = make([][4]float64, workers)
	}
	s.bounds = s.bounds[:workers+1]
	s.out = s.out[:workers]
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
	if workers == 1 {
		return
	}
	s.req = make([]chan int, workers)
	s.done = make(chan struct{}, workers)
	for w := 1; w < workers; w++ {
		ch := make(chan int)
		s.req[w] = ch
		go func() {
			for k := range ch {
				s.out[w] = s.kernel(k, w)
				s.done <- struct{}{}
			}
		}()
	}
}

// stopTeam ends the helper goroutines.
func (s *IterSolver) stopTeam() {
	if s.nw > 1 {
		for w := 1; w < s.nw; w++ {
			close(s.req[w])
		}
		s.req, s.done = nil, nil
	}
	s.nw = 0
}

// run executes kernel k over all blocks and returns the summed partials.
func (s *IterSolver) run(k int) [4]float64 {
	if s.nw <= 1 {
		return s.kernel(k, 0)
	}
	for w := 1; w < s.nw; w++ {
		s.req[w] <- k
	}
	o := s.kernel(k, 0)
	for w := 1; w < s.nw; w++ {
		<-s.done
	}
	for w := 1; w < s.nw; w++ {
		for t := range o {
			o[t] += s.out[w][t]
		}
	}
	return o
}

// release drops the workspace.
func (s *IterSolver) release() { *s = IterSolver{} }
