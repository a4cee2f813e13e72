package linalg

import (
	"fmt"
	"math"
	"runtime"
	"sort"
)

// IterMethod selects the Krylov method of the iterative solver.
type IterMethod int

const (
	// IterAuto uses IterCG when P is symmetric (then I - gamma P is
	// symmetric positive definite for a stochastic P) and IterBiCGSTAB
	// otherwise. It falls back to BiCGSTAB if CG meets a non-positive
	// curvature.
	IterAuto IterMethod = iota
	// IterCG is the conjugate gradient method with Jacobi (diagonal)
	// preconditioning, for symmetric positive definite I - gamma P.
	IterCG
	// IterBiCGSTAB is van der Vorst's stabilised bi-conjugate gradient
	// method with Jacobi right preconditioning, for any P.
	IterBiCGSTAB
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
	// for CG, two for BiCGSTAB). 0 means 10000.
	MaxIter int
	// UseInitial, if true, takes the initial guess x0 from dst (a warm
	// start); otherwise x0 = 0.
	UseInitial bool
	// Method selects the Krylov method; the zero value is IterAuto.
	Method IterMethod
	// Workers is the number of goroutines sharing each product and vector
	// update. 0 means min(2, GOMAXPROCS) when P has at least 1<<17 rows,
	// and 1 below that, where synchronisation costs more than it saves.
	// For SolveIterativeMulti it is the number of columns solved at once
	// (0 means min(2, GOMAXPROCS, columns)), each solved on one goroutine.
	Workers int
}

// IterResult reports what the iterative solver achieved.
type IterResult struct {
	Iterations int        // iterations taken
	Residual   float64    // achieved relative residual ||b - A x|| / ||b||, recomputed from x
	Method     IterMethod // method used last (IterCG or IterBiCGSTAB)
}

// NotConvergedError is returned by the iterative solver when it stops
// before the relative residual reaches the tolerance. It wraps
// ErrNotConverged. The solution vector then holds the last iterate.
type NotConvergedError struct {
	Iterations int     // iterations taken
	Residual   float64 // relative residual of the last iterate (may be NaN after a breakdown)
	Tol        float64 // the tolerance asked for
}

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
// they run on one goroutine. The zero value is ready to use. An IterSolver
// must not be used by several goroutines at once.
type IterSolver struct {
	n                    int
	p                    *CSR
	gamma                float64
	x, b                 []float64
	dinv, r, rhat        []float64
	pv, q, v, phat, shat []float64 // q doubles as s, v as t in BiCGSTAB
	alpha, beta, omega   float64

	// parallel team
	nw     int
	bounds []int
	req    []chan int
	done   chan struct{}
	out    [][4]float64
}

// Kernels run by the team over row ranges.
const (
	kResidual = iota // r = b - A x; r.r, r.Dinv r
	kCGDir           // p = Dinv r + beta p
	kCGMatVec        // q = A p; p.q
	kCGUpdate        // x += alpha p; r -= alpha q; r.Dinv r, r.r
	kBiDir           // p = r + beta (p - omega v); phat = Dinv p
	kBiMatVec1       // v = A phat; rhat.v
	kBiS             // s = r - alpha v; shat = Dinv s; s.s
	kBiMatVec2       // t = A shat; t.s, t.t
	kBiUpdate        // x += alpha phat + omega shat; r = s - omega t; rhat.r, r.r
	kBiUpdateHalf    // x += alpha phat
)

func grow(s []float64, n int) []float64 {
	if cap(s) < n {
		return make([]float64, n)
	}
	return s[:n]
}

// Solve solves (I - gamma P) x = b for a square CSR P and gamma in [0, 1),
// writing x into dst (len n), and returns the iterations taken and the
// achieved relative residual.
//
// The method is preconditioned conjugate gradients when P is symmetric and
// BiCGSTAB otherwise (see IterMethod), both with the Jacobi preconditioner
// diag(I - gamma P). For a stochastic P the eigenvalues of I - gamma P lie
// in the disc of radius gamma around 1, so both converge in about
// sqrt((1+gamma)/(1-gamma)) ln(2/Tol) iterations for symmetric P
// (Saad 2003, Iterative Methods for Sparse Linear Systems, Theorem 6.29);
// each iteration costs one (CG) or two (BiCGSTAB) products with P, O(nnz).
//
// Stopping rule: the solver stops when the recurrence residual r satisfies
// ||r|| <= Tol ||b||; it then recomputes the true residual b - (I - gamma P) x
// and, if that misses the tolerance, restarts from x (at most three times,
// within MaxIter). The reported Residual is always the true relative
// residual of the returned x.
//
// Errors wrap ErrDiscount (gamma outside [0, 1)), ErrDimension (P not
// square, or len(dst) or len(b) not n), ErrNonFinite (NaN or Inf in P, b or,
// with UseInitial, dst), or ErrNotConverged as a *NotConvergedError when
// MaxIter is reached or the method breaks down; dst then holds the last
// iterate. If b = 0, x = 0 is returned at once.
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
	defer func() { s.p, s.x, s.b = nil, nil, nil }()
	s.dinv = grow(s.dinv, n)
	sym, err := s.scan(cfg.Method == IterAuto)
	if err != nil {
		return IterResult{}, err
	}
	if bb == 0 {
		clear(dst)
		return IterResult{Method: IterCG}, nil
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
	s.r = grow(s.r, n)
	s.pv = grow(s.pv, n)
	s.q = grow(s.q, n)
	if method == IterBiCGSTAB || cfg.Method == IterAuto {
		s.rhat = grow(s.rhat, n)
		s.v = grow(s.v, n)
		s.phat = grow(s.phat, n)
		s.shat = grow(s.shat, n)
	}
	s.startTeam(cfg.Workers)
	defer s.stopTeam()

	bnorm := math.Sqrt(bb)
	target := cfg.Tol * bnorm
	res := IterResult{Method: method}
	for restart := 0; ; restart++ {
		var ok bool
		if method == IterCG {
			ok = s.cg(&res, target, cfg.MaxIter)
			if !ok && cfg.Method == IterAuto && res.Iterations < cfg.MaxIter && restart < 3 {
				// Non-positive curvature: P is symmetric but I - gamma P is
				// not positive definite. Continue with BiCGSTAB.
				method = IterBiCGSTAB
				res.Method = method
				continue
			}
		} else {
			ok = s.bicgstab(&res, target, cfg.MaxIter)
		}
		rr := s.run(kResidual)[0]
		res.Residual = math.Sqrt(rr) / bnorm
		if res.Residual <= cfg.Tol {
			return res, nil
		}
		if !ok || restart >= 3 || res.Iterations >= cfg.MaxIter || math.IsNaN(res.Residual) {
			return res, &NotConvergedError{Iterations: res.Iterations, Residual: res.Residual, Tol: cfg.Tol}
		}
	}
}

// scan fills dinv, checks P for non-finite values and, if want, reports
// whether P is symmetric.
func (s *IterSolver) scan(want bool) (sym bool, err error) {
	p, g := s.p, s.gamma
	sym = want
	for i := 0; i < s.n; i++ {
		ind, val := p.Row(i)
		d := 1.0
		for k, j := range ind {
			v := val[k]
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return false, fmt.Errorf("linalg: iterative: p row %d: %w", i, ErrNonFinite)
			}
			if j == i {
				d -= g * v
			} else if sym && j < i {
				// Look for (j, i) with the same value.
				jind, jval := p.Row(j)
				t := sort.SearchInts(jind, i)
				if t == len(jind) || jind[t] != i || jval[t] != v {
					sym = false
				}
			}
		}
		if d > 0 {
			s.dinv[i] = 1 / d
		} else {
			s.dinv[i] = 1
		}
	}
	if sym {
		// Entries (i, j) with j > i need a partner too; count both halves.
		var lower, upper int
		for i := 0; i < s.n; i++ {
			ind, _ := p.Row(i)
			for _, j := range ind {
				if j < i {
					lower++
				} else if j > i {
					upper++
				}
			}
		}
		sym = lower == upper
	}
	return sym, nil
}

// cg runs Jacobi-preconditioned conjugate gradients from the current x.
// It returns false on a breakdown or when maxIter is reached.
func (s *IterSolver) cg(res *IterResult, target float64, maxIter int) bool {
	o := s.run(kResidual)
	rr, rz := o[0], o[1]
	if math.Sqrt(rr) <= target {
		return true
	}
	s.beta = 0
	s.run(kCGDir)
	for res.Iterations < maxIter {
		res.Iterations++
		pq := s.run(kCGMatVec)[0]
		if !(pq > 0) {
			return false
		}
		s.alpha = rz / pq
		o := s.run(kCGUpdate)
		rzNew, rrNew := o[0], o[1]
		if math.Sqrt(rrNew) <= target {
			return true
		}
		if math.IsNaN(rrNew) || math.IsInf(rrNew, 0) {
			return false
		}
		s.beta = rzNew / rz
		rz = rzNew
		s.run(kCGDir)
	}
	return false
}

// bicgstab runs right-preconditioned BiCGSTAB (van der Vorst 1992, SIAM J.
// Sci. Stat. Comput. 13(2), Algorithm "Bi-CGSTAB") from the current x. It
// returns false on a breakdown or when maxIter is reached.
func (s *IterSolver) bicgstab(res *IterResult, target float64, maxIter int) bool {
	rr := s.run(kResidual)[0]
	if math.Sqrt(rr) <= target {
		return true
	}
	copy(s.rhat, s.r)
	clear(s.pv)
	clear(s.v)
	rho, alpha, omega := 1.0, 1.0, 1.0
	rhoNew := rr // rhat = r
	for res.Iterations < maxIter {
		res.Iterations++
		if rhoNew == 0 {
			return false
		}
		s.beta = (rhoNew / rho) * (alpha / omega)
		s.omega = omega
		rho = rhoNew
		s.run(kBiDir)
		rv := s.run(kBiMatVec1)[0]
		if rv == 0 || math.IsNaN(rv) {
			return false
		}
		alpha = rho / rv
		s.alpha = alpha
		ss := s.run(kBiS)[0]
		if math.Sqrt(ss) <= target {
			s.run(kBiUpdateHalf)
			return true
		}
		o := s.run(kBiMatVec2)
		ts, tt := o[0], o[1]
		if tt == 0 || math.IsNaN(tt) {
			return false
		}
		omega = ts / tt
		s.omega = omega
		o = s.run(kBiUpdate)
		rhoNew, rr = o[0], o[1]
		if math.Sqrt(rr) <= target {
			return true
		}
		if omega == 0 || math.IsNaN(rr) || math.IsInf(rr, 0) {
			return false
		}
	}
	return false
}

// matVec sets dst[i] = src[i] - gamma (P src)[i] for rows lo..hi-1 and
// returns sum dst[i] w[i].
func (s *IterSolver) matVec(dst, src, w []float64, lo, hi int) float64 {
	p := s.p
	g := s.gamma
	ptr, ind, val := p.Ptr, p.Ind, p.Val
	var dot float64
	for i := lo; i < hi; i++ {
		ri := ind[ptr[i]:ptr[i+1]]
		rv := val[ptr[i]:ptr[i+1]]
		rv = rv[:len(ri)]
		var sum float64
		for k, j := range ri {
			sum += rv[k] * src[j]
		}
		v := src[i] - g*sum
		dst[i] = v
		dot += v * w[i]
	}
	return dot
}

// kernel runs kernel k over rows lo..hi-1 and returns its partial sums.
func (s *IterSolver) kernel(k, lo, hi int) (o [4]float64) {
	switch k {
	case kResidual:
		p, g := s.p, s.gamma
		x, b, r, dinv := s.x, s.b[:hi], s.r[:hi], s.dinv[:hi]
		var rr, rz float64
		for i := lo; i < hi; i++ {
			ind, val := p.Ind[p.Ptr[i]:p.Ptr[i+1]], p.Val[p.Ptr[i]:p.Ptr[i+1]]
			var sum float64
			for t, j := range ind {
				sum += val[t] * x[j]
			}
			v := b[i] - (x[i] - g*sum)
			r[i] = v
			rr += v * v
			rz += v * v * dinv[i]
		}
		o[0], o[1] = rr, rz
	case kCGDir:
		pv, r, dinv, beta := s.pv[:hi], s.r[:hi], s.dinv[:hi], s.beta
		for i := lo; i < hi; i++ {
			pv[i] = dinv[i]*r[i] + beta*pv[i]
		}
	case kCGMatVec:
		o[0] = s.matVec(s.q, s.pv, s.pv, lo, hi)
	case kCGUpdate:
		x, r, pv, q, dinv, a := s.x[:hi], s.r[:hi], s.pv[:hi], s.q[:hi], s.dinv[:hi], s.alpha
		var rz, rr float64
		for i := lo; i < hi; i++ {
			x[i] += a * pv[i]
			v := r[i] - a*q[i]
			r[i] = v
			rr += v * v
			rz += v * v * dinv[i]
		}
		o[0], o[1] = rz, rr
	case kBiDir:
		pv, r, v, ph, dinv, beta, om := s.pv[:hi], s.r[:hi], s.v[:hi], s.phat[:hi], s.dinv[:hi], s.beta, s.omega
		for i := lo; i < hi; i++ {
			t := r[i] + beta*(pv[i]-om*v[i])
			pv[i] = t
			ph[i] = dinv[i] * t
		}
	case kBiMatVec1:
		o[0] = s.matVec(s.v, s.phat, s.rhat, lo, hi)
	case kBiS:
		r, v, q, sh, dinv, a := s.r[:hi], s.v[:hi], s.q[:hi], s.shat[:hi], s.dinv[:hi], s.alpha
		var ss float64
		for i := lo; i < hi; i++ {
			t := r[i] - a*v[i]
			q[i] = t
			sh[i] = dinv[i] * t
			ss += t * t
		}
		o[0] = ss
	case kBiMatVec2:
		// t is stored in v (v is rebuilt in the next kBiDir only after
		// its use there, so keep v: store t in pv? No: pv is needed in
		// kBiDir. Use r as t's home: r is recomputed from s and t.)
		tt := s.r
		o[0] = s.matVec(tt, s.shat, s.q, lo, hi)
		var n2 float64
		for i := lo; i < hi; i++ {
			n2 += tt[i] * tt[i]
		}
		o[1] = n2
	case kBiUpdate:
		x, ph, sh, r, q, rhat, a, om := s.x[:hi], s.phat[:hi], s.shat[:hi], s.r[:hi], s.q[:hi], s.rhat[:hi], s.alpha, s.omega
		var rhr, rr float64
		for i := lo; i < hi; i++ {
			x[i] += a*ph[i] + om*sh[i]
			t := q[i] - om*r[i] // r holds t here
			r[i] = t
			rhr += rhat[i] * t
			rr += t * t
		}
		o[0], o[1] = rhr, rr
	case kBiUpdateHalf:
		x, ph, a := s.x[:hi], s.phat[:hi], s.alpha
		for i := lo; i < hi; i++ {
			x[i] += a * ph[i]
		}
	}
	return o
}

// parallelRows is the number of rows from which the default Workers uses
// two goroutines.
const parallelRows = 1 << 17

// startTeam starts the helper goroutines and splits the rows by stored
// entries.
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
		// First row whose work (entries plus one per row) reaches w/workers.
		goal := (nnz + s.n) * w / workers
		s.bounds[w] = sort.Search(s.n, func(i int) bool { return s.p.Ptr[i]+i >= goal })
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
		lo, hi := s.bounds[w], s.bounds[w+1]
		go func() {
			for k := range ch {
				s.out[w] = s.kernel(k, lo, hi)
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

// run executes kernel k over all rows and returns the summed partials.
func (s *IterSolver) run(k int) [4]float64 {
	if s.nw <= 1 {
		return s.kernel(k, 0, s.n)
	}
	for w := 1; w < s.nw; w++ {
		s.req[w] <- k
	}
	o := s.kernel(k, s.bounds[0], s.bounds[1])
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
