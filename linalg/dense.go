package linalg

import (
	"errors"
	"fmt"
	"math"
	"sync"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"
)

// CheckStochastic returns nil if p is square, finite, non-negative, and every
// row sums to 1 within tol. Otherwise it returns an error wrapping
// ErrDimension or ErrNonFinite, or a *RowSumError (which wraps
// ErrNotStochastic) naming the first bad row and its sum. A *CSR is checked
// in O(nnz); any other matrix in O(n^2) through At.
//
// Special cases are:
//
//	0x0 matrix      nil (the empty chain is trivially stochastic)
//	tol < 0 or NaN  treated as tol = 0
func CheckStochastic(p mat.Matrix, tol float64) error {
	return checkRows("check stochastic", p, tol, false)
}

// SubstochasticTol is the tolerance above 1 on the row sums of the p given
// to Successor.
const SubstochasticTol = 1e-9

// checkRows is CheckStochastic, or with sub set the same check of a
// substochastic p (rows summing to at most 1 + tol).
func checkRows(what string, p mat.Matrix, tol float64, sub bool) error {
	r, c := p.Dims()
	if r != c {
		return fmt.Errorf("linalg: %s: %dx%d not square: %w", what, r, c, ErrDimension)
	}
	if !(tol >= 0) {
		tol = 0
	}
	check := func(i int, vals []float64, at func(j int) float64, cols int) error {
		var s float64
		for j := 0; j < cols; j++ {
			var v float64
			if vals != nil {
				v = vals[j]
			} else {
				v = at(j)
			}
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("linalg: %s: row %d: %w", what, i, ErrNonFinite)
			}
			if v < 0 {
				return &RowSumError{Row: i, Neg: true}
			}
			s += v
		}
		if sub && !(s <= 1+tol) || !sub && !(math.Abs(s-1) <= tol) {
			return &RowSumError{Row: i, Sum: s}
		}
		return nil
	}
	switch m := p.(type) {
	case *CSR:
		for i := 0; i < r; i++ {
			_, v := m.Row(i)
			if err := check(i, v, nil, len(v)); err != nil {
				return err
			}
		}
	case mat.RawMatrixer:
		raw := m.RawMatrix()
		for i := 0; i < r; i++ {
			if err := check(i, raw.Data[i*raw.Stride:i*raw.Stride+c], nil, c); err != nil {
				return err
			}
		}
	default:
		for i := 0; i < r; i++ {
			if err := check(i, nil, func(j int) float64 { return p.At(i, j) }, c); err != nil {
				return err
			}
		}
	}
	return nil
}

// Successor sets dst to the successor matrix
//
//	M = sum_{t>=0} gamma^t P^t = (I - gamma P)^-1
//
// for a square substochastic p (non-negative entries, every row summing to
// at most 1 + SubstochasticTol: a Markov chain, whose rows may lose mass
// where an episode ends, as the chains of terminal states do) and gamma in
// [0, 1). A row summing to more than 1, or a negative entry, describes no
// chain and is an error; SolveSuccessor solves with any p. It factorises
// I - gamma P once and solves for the identity; no general inverse
// routine is used. If dst is empty it is resized to n x n; otherwise it
// must be n x n.
//
// The factorisation is chosen as in SolveSuccessor. Successor costs
// O(n^3) for a dense p and O(n^2 (kl + ku)) for a p with lower and upper
// bandwidths kl and ku (a grid chain in row-major order has kl = ku = the
// grid width).
//
// Errors wrap ErrDiscount (gamma outside [0, 1) or NaN), ErrDimension (p not
// square, dst of the wrong shape), ErrNonFinite (NaN or Inf in p),
// ErrNotStochastic (a *RowSumError: a negative entry or a row summing to
// more than 1) or ErrSingular (I - gamma P singular to working precision).
func Successor(dst *mat.Dense, p mat.Matrix, gamma float64) error {
	n, c := p.Dims()
	if n != c {
		return fmt.Errorf("linalg: successor: p is %dx%d, not square: %w", n, c, ErrDimension)
	}
	if err := checkRows("successor", p, SubstochasticTol, true); err != nil {
		if errors.Is(err, ErrNotStochastic) {
			return fmt.Errorf("linalg: successor: p is not substochastic: %w", err)
		}
		return err
	}
	if err := checkDst(dst, n, n); err != nil {
		return fmt.Errorf("linalg: successor: %w", err)
	}
	if err := solveSuccessor(dst, p, gamma, nil); err != nil {
		return fmt.Errorf("linalg: successor: %w", err)
	}
	return nil
}

// SolveSuccessor solves (I - gamma P) X = B for X, storing X in dst, with one
// factorisation for all columns of B. p (n x n) need not be stochastic, b is
// n x m; dst is resized to n x m if empty and must be n x m otherwise. b may
// be dst.
//
// The factorisation is chosen from the structure of p: if its lower and upper
// bandwidths kl and ku are small against n (a chain on a grid in row-major
// order, or a state-action chain built from one), a banded LU with partial
// pivoting costs O(n kl (kl + ku)) and each right-hand side O(n (2 kl + ku));
// otherwise the dense blocked LU of gonum (partial pivoting) costs about
// 2/3 n^3 plus 2 n^2 per right-hand side. A *CSR p is read in O(nnz).
//
// Errors wrap ErrDiscount (gamma outside [0, 1) or NaN), ErrDimension (shapes
// do not agree), ErrNonFinite (NaN or Inf in p or b) or ErrSingular (a zero
// pivot, or a condition estimate beyond 1/eps; possible only when p is not
// sub-stochastic, since for sub-stochastic p the matrix I - gamma P is
// strictly diagonally dominant).
func SolveSuccessor(dst *mat.Dense, p mat.Matrix, gamma float64, b mat.Matrix) error {
	n, c := p.Dims()
	if n != c {
		return fmt.Errorf("linalg: solve successor: p is %dx%d, not square: %w", n, c, ErrDimension)
	}
	br, bc := b.Dims()
	if br != n {
		return fmt.Errorf("linalg: solve successor: b has %d rows, want %d: %w", br, n, ErrDimension)
	}
	if err := checkDst(dst, n, bc); err != nil {
		return fmt.Errorf("linalg: solve successor: %w", err)
	}
	if err := checkFinite(b); err != nil {
		return fmt.Errorf("linalg: solve successor: b: %w", err)
	}
	if err := solveSuccessor(dst, p, gamma, b); err != nil {
		return fmt.Errorf("linalg: solve successor: %w", err)
	}
	return nil
}

// checkDst returns an error if dst is neither empty nor r x c.
func checkDst(dst *mat.Dense, r, c int) error {
	if dst.IsEmpty() {
		return nil
	}
	dr, dc := dst.Dims()
	if dr != r || dc != c {
		return fmt.Errorf("dst is %dx%d, want %dx%d: %w", dr, dc, r, c, ErrDimension)
	}
	return nil
}

// checkFinite returns an error wrapping ErrNonFinite if m holds NaN or Inf.
func checkFinite(m mat.Matrix) error {
	r, c := m.Dims()
	switch t := m.(type) {
	case *CSR:
		for _, v := range t.Val {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return ErrNonFinite
			}
		}
		return nil
	case mat.RawMatrixer:
		raw := t.RawMatrix()
		for i := 0; i < r; i++ {
			for _, v := range raw.Data[i*raw.Stride : i*raw.Stride+c] {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					return fmt.Errorf("row %d: %w", i, ErrNonFinite)
				}
			}
		}
		return nil
	}
	for i := 0; i < r; i++ {
		for j := 0; j < c; j++ {
			v := m.At(i, j)
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("entry (%d,%d): %w", i, j, ErrNonFinite)
			}
		}
	}
	return nil
}

// bandwidths returns the lower and upper bandwidths of the non-zero pattern
// of p (n x n), or an error wrapping ErrNonFinite.
func bandwidths(p mat.Matrix) (kl, ku int, err error) {
	n, _ := p.Dims()
	note := func(i, j int) {
		if d := i - j; d > kl {
			kl = d
		} else if -d > ku {
			ku = -d
		}
	}
	switch t := p.(type) {
	case *CSR:
		for i := 0; i < n; i++ {
			ind, val := t.Row(i)
			for k, j := range ind {
				v := val[k]
				if math.IsNaN(v) || math.IsInf(v, 0) {
					return 0, 0, fmt.Errorf("p row %d: %w", i, ErrNonFinite)
				}
				if v != 0 {
					note(i, j)
				}
			}
		}
		return kl, ku, nil
	case mat.RawMatrixer:
		raw := t.RawMatrix()
		for i := 0; i < n; i++ {
			row := raw.Data[i*raw.Stride : i*raw.Stride+n]
			for j, v := range row {
				if v != 0 {
					if math.IsNaN(v) || math.IsInf(v, 0) {
						return 0, 0, fmt.Errorf("p row %d: %w", i, ErrNonFinite)
					}
					note(i, j)
				}
			}
		}
		return kl, ku, nil
	}
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			v := p.At(i, j)
			if v != 0 {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					return 0, 0, fmt.Errorf("p entry (%d,%d): %w", i, j, ErrNonFinite)
				}
				note(i, j)
			}
		}
	}
	return kl, ku, nil
}

// useBand reports whether the banded LU should replace gonum's dense blocked
// LU for an n x n matrix with bandwidths kl, ku. The dense LU runs its
// trailing updates through a cache-blocked, parallel dgemm, which can be
// several times faster per flop than the banded row operations here, so
// the band is used only when its flop count is below an eighth of the dense
// one (a deliberately safe margin: on grid chains the band wins by 15x to
// 60x, see BenchmarkSolveSuccessor).
func useBand(n, kl, ku int) bool {
	band := float64(n) * float64(kl+1) * float64(2*kl+ku+1)
	dense := float64(n) * float64(n) * float64(n) / 3
	return 8*band < dense
}

// solveSuccessor does the work of Successor (b == nil, identity right-hand
// side) and SolveSuccessor. Shapes have been checked.
func solveSuccessor(dst *mat.Dense, p mat.Matrix, gamma float64, b mat.Matrix) error {
	if !(gamma >= 0 && gamma < 1) {
		return fmt.Errorf("gamma %v outside [0, 1): %w", gamma, ErrDiscount)
	}
	return solveShifted(dst, p, gamma, b)
}

// solveShifted solves (I - gamma P) X = B (identity B if b is nil) for any
// finite gamma. Shapes have been checked.
func solveShifted(dst *mat.Dense, p mat.Matrix, gamma float64, b mat.Matrix) error {
	n, _ := p.Dims()
	kl, ku, err := bandwidths(p)
	if err != nil {
		return err
	}
	m := n
	if b != nil {
		_, m = b.Dims()
	}
	if n == 0 || m == 0 {
		if dst.IsEmpty() && n > 0 && m > 0 {
			dst.ReuseAs(n, m)
		}
		return nil
	}
	if !useBand(n, kl, ku) {
		return solveDense(dst, p, gamma, b)
	}
	var f bandLU
	f.init(n, kl, ku)
	f.fill(p, gamma)
	if err := f.factor(); err != nil {
		return err
	}
	if dst.IsEmpty() {
		dst.ReuseAs(n, m)
	}
	if b == nil {
		dst.Zero()
		for i := 0; i < n; i++ {
			dst.Set(i, i, 1)
		}
	} else {
		dst.Copy(b)
	}
	raw := dst.RawMatrix()
	f.solve(raw.Data, raw.Stride, m, b == nil)
	return checkFinite(dst)
}

// solveDense solves with gonum's dense LU.
func solveDense(dst *mat.Dense, p mat.Matrix, gamma float64, b mat.Matrix) error {
	n, _ := p.Dims()
	a := mat.NewDense(n, n, nil)
	if sp, ok := p.(*CSR); ok {
		for i := 0; i < n; i++ {
			ind, val := sp.Row(i)
			for k, j := range ind {
				a.Set(i, j, -gamma*val[k])
			}
		}
	} else {
		a.Scale(-gamma, p)
	}
	raw := a.RawMatrix()
	for i := 0; i < n; i++ {
		raw.Data[i*raw.Stride+i]++
	}
	var lu mat.LU
	lu.Factorize(a)
	if b == nil {
		b = eye(n)
	}
	if err := lu.SolveTo(dst, false, b); err != nil {
		return fmt.Errorf("condition number estimate %.3g: %w", lu.Cond(), ErrSingular)
	}
	if err := checkFinite(dst); err != nil {
		return fmt.Errorf("%w (result overflowed: %w)", ErrSingular, err)
	}
	return nil
}

func eye(n int) *mat.Dense {
	d := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		d.Set(i, i, 1)
	}
	return d
}

// bandLU is an LU factorisation with partial pivoting of a banded n x n
// matrix with lower bandwidth kl and upper bandwidth ku, in the manner of
// LAPACK's dgbtf2 but stored by rows. The row at position r keeps columns
// r-kl .. r+kl+ku (width w = 2kl+ku+1): the multipliers of L to the left of
// the diagonal, U on and to the right of it, where row interchanges can
// widen U to kl+ku above the diagonal.
type bandLU struct {
	n, kl, ku, w int
	a            []float64
	piv          []int // row interchanged with row k at step k
	end          []int // last column of U row k that may be non-zero
}

func (f *bandLU) init(n, kl, ku int) {
	f.n, f.kl, f.ku = n, kl, ku
	f.w = 2*kl + ku + 1
	f.a = make([]float64, n*f.w)
	f.piv = make([]int, n)
	f.end = make([]int, n)
}

// idx returns the index of entry (r, c) in f.a.
func (f *bandLU) idx(r, c int) int { return r*f.w + c - r + f.kl }

// fill sets the band to I - gamma p.
func (f *bandLU) fill(p mat.Matrix, gamma float64) {
	n := f.n
	switch t := p.(type) {
	case *CSR:
		for i := 0; i < n; i++ {
			ind, val := t.Row(i)
			for k, j := range ind {
				if val[k] != 0 {
					f.a[f.idx(i, j)] = -gamma * val[k]
				}
			}
		}
	case mat.RawMatrixer:
		raw := t.RawMatrix()
		for i := 0; i < n; i++ {
			lo, hi := max(0, i-f.kl), min(n-1, i+f.ku)
			row := raw.Data[i*raw.Stride : i*raw.Stride+n]
			for j := lo; j <= hi; j++ {
				f.a[f.idx(i, j)] = -gamma * row[j]
			}
		}
	default:
		for i := 0; i < n; i++ {
			lo, hi := max(0, i-f.kl), min(n-1, i+f.ku)
			for j := lo; j <= hi; j++ {
				f.a[f.idx(i, j)] = -gamma * p.At(i, j)
			}
		}
	}
	for i := 0; i < n; i++ {
		f.a[f.idx(i, i)]++
		f.end[i] = min(n-1, i+f.ku)
	}
}

// factor computes the factorisation in place. It returns an error wrapping
// ErrSingular on a zero pivot or when the ratio of the smallest to the
// largest pivot magnitude is below machine epsilon.
func (f *bandLU) factor() error {
	n, kl := f.n, f.kl
	a := f.a
	minPiv, maxPiv := math.Inf(1), 0.0
	for k := 0; k < n; k++ {
		last := min(n-1, k+kl)
		p, best := k, math.Abs(a[f.idx(k, k)])
		for i := k + 1; i <= last; i++ {
			if v := math.Abs(a[f.idx(i, k)]); v > best {
				p, best = i, v
			}
		}
		f.piv[k] = p
		if best == 0 {
			return fmt.Errorf("zero pivot in column %d: %w", k, ErrSingular)
		}
		minPiv, maxPiv = min(minPiv, best), max(maxPiv, best)
		if p != k {
			e := max(f.end[k], f.end[p])
			rk := a[f.idx(k, k):f.idx(k, e+1)]
			rp := a[f.idx(p, k):f.idx(p, e+1)]
			for j := range rk {
				rk[j], rp[j] = rp[j], rk[j]
			}
			f.end[k], f.end[p] = f.end[p], f.end[k]
		}
		ek := f.end[k]
		inv := 1 / a[f.idx(k, k)]
		rowk := a[f.idx(k, k+1):f.idx(k, ek+1)]
		for i := k + 1; i <= last; i++ {
			ik := f.idx(i, k)
			l := a[ik]
			if l == 0 {
				continue
			}
			l *= inv
			a[ik] = l
			floats.AddScaled(a[ik+1:ik+1+len(rowk)], -l, rowk)
			if ek > f.end[i] {
				f.end[i] = ek
			}
		}
	}
	if minPiv < maxPiv*0x1p-52 {
		return fmt.Errorf("pivot ratio %.3g below machine epsilon: %w", minPiv/maxPiv, ErrSingular)
	}
	return nil
}

// solve overwrites the n x m row-major matrix x (row stride stride) with the
// solution of A X = x. If ident, x holds the identity (m = n), whose
// column c stays zero above row c - kl during the forward pass, so that
// pass skips those zeros. Wide right-hand sides are split over two
// goroutines.
func (f *bandLU) solve(x []float64, stride, m int, ident bool) {
	const minWork = 1 << 22 // flops below which one goroutine is faster
	work := float64(f.n) * float64(2*f.kl+f.ku+1) * float64(m) * 2
	if m < 32 || work < minWork {
		f.solveCols(x, stride, 0, m, ident)
		return
	}
	half := m / 2
	if ident {
		// The left columns carry more forward work; move the split right.
		half = m * 9 / 16
	}
	var wg sync.WaitGroup
	wg.Go(func() { f.solveCols(x, stride, 0, half, ident) })
	f.solveCols(x, stride, half, m, ident)
	wg.Wait()
}

// solveCols solves for columns c0..c1-1 of x.
func (f *bandLU) solveCols(x []float64, stride, c0, c1 int, ident bool) {
	n, kl := f.n, f.kl
	a := f.a
	row := func(i int) []float64 { return x[i*stride+c0 : i*stride+c1] }
	// Forward: apply the interchanges and L in the order of elimination.
	for k := 0; k < n; k++ {
		xk := row(k)
		if ident {
			// Rows k..k+kl are zero beyond column k+kl at this step.
			e := min(c1, k+kl+1)
			if e <= c0 {
				continue
			}
			xk = x[k*stride+c0 : k*stride+e]
		}
		if p := f.piv[k]; p != k {
			xp := x[p*stride+c0 : p*stride+c0+len(xk)]
			for j := range xk {
				xk[j], xp[j] = xp[j], xk[j]
			}
		}
		last := min(n-1, k+kl)
		for i := k + 1; i <= last; i++ {
			if l := a[f.idx(i, k)]; l != 0 {
				floats.AddScaled(x[i*stride+c0:i*stride+c0+len(xk)], -l, xk)
			}
		}
	}
	// Backward: U.
	for k := n - 1; k >= 0; k-- {
		xk := row(k)
		for c := k + 1; c <= f.end[k]; c++ {
			if u := a[f.idx(k, c)]; u != 0 {
				floats.AddScaled(xk, -u, row(c))
			}
		}
		floats.Scale(1/a[f.idx(k, k)], xk)
	}
}
