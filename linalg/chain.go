package linalg

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// substochasticTol is the slack allowed on row sums above 1 and on entries
// below 0 when checking a transient block.
const substochasticTol = 1e-9

// Fundamental sets dst to the fundamental matrix N = (I - Q)^-1 of an
// absorbing chain, where q (t x t) is the block of transitions among its
// transient states (Grinstead & Snell, Introduction to Probability, ch. 11,
// Theorem 11.4). N[i][j] is the expected number of visits to transient state
// j starting from i (the start counts as a visit); N 1 gives the expected
// steps to absorption and N R the absorption probabilities, for R the
// transient-to-absorbing block. If dst is empty it is resized to t x t;
// otherwise it must be t x t.
//
// q must be sub-stochastic (entries >= 0 and row sums <= 1, each within
// 1e-9). Before factorising, Fundamental checks structurally that every
// transient state can reach a row that leaks probability out of the block
// (row sum below 1 - 1e-12 * t), by a search over the reversed edges of q
// as CannotReach does, in O(t + nnz); otherwise the block holds a closed
// class and N does not exist. The solve costs as SolveSuccessor with
// gamma = 1.
//
// Errors wrap ErrDimension (q not square or dst of the wrong shape),
// ErrNonFinite, ErrNotStochastic (a negative entry or a row sum above 1, as
// a *RowSumError), ErrNotAbsorbing (the error names a state that cannot
// reach absorption) or ErrSingular (numerically singular I - Q, which
// happens when the leak is tiny).
func Fundamental(dst *mat.Dense, q mat.Matrix) error {
	t, c := q.Dims()
	if t != c {
		return fmt.Errorf("linalg: fundamental: q is %dx%d, not square: %w", t, c, ErrDimension)
	}
	if err := checkDst(dst, t, t); err != nil {
		return fmt.Errorf("linalg: fundamental: %w", err)
	}
	g, sums, err := graphOf(q)
	if err != nil {
		return fmt.Errorf("linalg: fundamental: %w", err)
	}
	leak := 1e-12 * float64(max(t, 1))
	reach := make([]bool, t)
	for i, s := range sums {
		if s > 1+substochasticTol {
			return fmt.Errorf("linalg: fundamental: %w", &RowSumError{Row: i, Sum: s})
		}
		reach[i] = s < 1-leak
	}
	// Walk the reversed edges: i reaches absorption if some j with
	// q[i][j] > 0 does.
	if i := g.reversed().unreachedFrom(reach); i >= 0 {
		return fmt.Errorf("linalg: fundamental: transient state %d cannot reach absorption: %w", i, ErrNotAbsorbing)
	}
	if t == 0 {
		return nil
	}
	if err := solveShifted(dst, q, 1, nil); err != nil {
		return fmt.Errorf("linalg: fundamental: %w", err)
	}
	return nil
}

// Stationary sets dst to the stationary distribution pi of an irreducible
// row-stochastic p: pi P = pi, sum(pi) = 1, pi > 0 (Grinstead & Snell,
// ch. 11, Theorem 11.10 for the regular case; unique for any irreducible
// chain, periodic ones included). If dst is empty it is resized to n;
// otherwise it must have length n.
//
// p must be stochastic within 1e-9 (CheckStochastic) and irreducible, which
// Stationary checks by breadth-first search from state 0 along the edges
// p[i][j] > 0 and along the reversed edges, in O(n + nnz). It then computes
// pi by the GTH state-reduction algorithm (Grassmann, Taksar & Heyman 1985,
// Operations Research 33(5); Stewart 1994, Introduction to the Numerical
// Solution of Markov Chains, §2.7), which uses no subtraction and is
// accurate to a small multiple of machine epsilon in every component. GTH is
// Gaussian elimination without pivoting, so it keeps the band of p: it costs
// O(n kl ku) time and O(n (kl + ku)) memory for bandwidths kl, ku (O(n^3)
// and O(n^2) for a dense p).
//
// Errors wrap ErrDimension, ErrNonFinite, ErrNotStochastic (as a
// *RowSumError) or ErrReducible (the error names a state that state 0 cannot
// reach, or that cannot reach state 0).
func Stationary(dst *mat.VecDense, p mat.Matrix) error {
	n, c := p.Dims()
	if n != c {
		return fmt.Errorf("linalg: stationary: p is %dx%d, not square: %w", n, c, ErrDimension)
	}
	if !dst.IsEmpty() && dst.Len() != n {
		return fmt.Errorf("linalg: stationary: dst has length %d, want %d: %w", dst.Len(), n, ErrDimension)
	}
	if n == 0 {
		return fmt.Errorf("linalg: stationary: empty chain: %w", ErrDimension)
	}
	if err := CheckStochastic(p, substochasticTol); err != nil {
		return fmt.Errorf("linalg: stationary: %w", err)
	}
	g, _, err := graphOf(p)
	if err != nil {
		return fmt.Errorf("linalg: stationary: %w", err)
	}
	if i := g.unreached(0); i >= 0 {
		return fmt.Errorf("linalg: stationary: state %d not reachable from state 0: %w", i, ErrReducible)
	}
	if i := g.reversed().unreached(0); i >= 0 {
		return fmt.Errorf("linalg: stationary: state 0 not reachable from state %d: %w", i, ErrReducible)
	}
	kl, ku, err := bandwidths(p)
	if err != nil {
		return fmt.Errorf("linalg: stationary: %w", err)
	}
	// Band copy (entry (i, j) at i*w + j - i + kl), or a dense copy when
	// the band is nearly full; GTH never leaves the band.
	w, off := kl+ku+1, kl
	if w >= n {
		w = n
	}
	idx := func(i, j int) int {
		if w == n {
			return i*n + j
		}
		return i*w + j - i + off
	}
	a := make([]float64, n*w)
	for i := 0; i < n; i++ {
		lo, hi := max(0, i-kl), min(n-1, i+ku)
		if sp, ok := p.(*CSR); ok {
			ind, val := sp.Row(i)
			for k, j := range ind {
				if val[k] != 0 { // explicit zeros may lie outside the band
					a[idx(i, j)] = val[k]
				}
			}
			continue
		}
		for j := lo; j <= hi; j++ {
			a[idx(i, j)] = p.At(i, j)
		}
	}
	for k := n - 1; k >= 1; k-- {
		jlo := max(0, k-kl)
		ilo := max(0, k-ku)
		rowk := a[idx(k, jlo):idx(k, k)]
		var s float64
		for _, v := range rowk {
			s += v
		}
		if !(s > 0) {
			// Cannot happen for an irreducible chain except by underflow.
			return fmt.Errorf("linalg: stationary: state %d isolated during reduction: %w", k, ErrSingular)
		}
		for i := ilo; i < k; i++ {
			ik := idx(i, k)
			aik := a[ik]
			if aik == 0 {
				continue
			}
			aik /= s
			a[ik] = aik
			rowi := a[idx(i, jlo) : idx(i, jlo)+len(rowk)]
			for j, v := range rowk {
				rowi[j] += aik * v
			}
		}
	}
	if dst.IsEmpty() {
		dst.ReuseAsVec(n)
	}
	pi := make([]float64, n)
	pi[0] = 1
	total := 1.0
	for k := 1; k < n; k++ {
		var s float64
		for i := max(0, k-ku); i < k; i++ {
			s += pi[i] * a[idx(i, k)]
		}
		pi[k] = s
		total += s
	}
	for i, v := range pi {
		dst.SetVec(i, v/total)
	}
	if math.IsInf(total, 0) || math.IsNaN(total) {
		return fmt.Errorf("linalg: stationary: overflow: %w", ErrSingular)
	}
	return nil
}

// graph is an adjacency structure in compressed rows.
type graph struct {
	ptr, ind []int
}

func (g graph) adj(i int) []int { return g.ind[g.ptr[i]:g.ptr[i+1]] }

// graphOf returns the graph of the positive entries of m, its row sums, or
// an error for a non-finite or negative entry.
func graphOf(m mat.Matrix) (graph, []float64, error) {
	n, _ := m.Dims()
	g := graph{ptr: make([]int, n+1)}
	sums := make([]float64, n)
	visit := func(i, j int, v float64) error {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("entry (%d,%d): %w", i, j, ErrNonFinite)
		}
		if v < -substochasticTol {
			return &RowSumError{Row: i, Neg: true}
		}
		sums[i] += v
		if v > 0 {
			g.ind = append(g.ind, j)
		}
		return nil
	}
	for i := 0; i < n; i++ {
		if sp, ok := m.(*CSR); ok {
			ind, val := sp.Row(i)
			for k, j := range ind {
				if err := visit(i, j, val[k]); err != nil {
					return graph{}, nil, err
				}
			}
		} else if rm, ok := m.(mat.RawMatrixer); ok {
			raw := rm.RawMatrix()
			for j, v := range raw.Data[i*raw.Stride : i*raw.Stride+n] {
				if err := visit(i, j, v); err != nil {
					return graph{}, nil, err
				}
			}
		} else {
			for j := 0; j < n; j++ {
				if err := visit(i, j, m.At(i, j)); err != nil {
					return graph{}, nil, err
				}
			}
		}
		g.ptr[i+1] = len(g.ind)
	}
	return g, sums, nil
}

// reversed returns the graph with every edge reversed.
func (g graph) reversed() graph {
	n := len(g.ptr) - 1
	r := graph{ptr: make([]int, n+1), ind: make([]int, len(g.ind))}
	for _, j := range g.ind {
		r.ptr[j+1]++
	}
	for i := 0; i < n; i++ {
		r.ptr[i+1] += r.ptr[i]
	}
	next := append([]int(nil), r.ptr[:n]...)
	for i := 0; i < n; i++ {
		for _, j := range g.adj(i) {
			r.ind[next[j]] = i
			next[j]++
		}
	}
	return r
}

// unreached returns a node not reachable from s, or -1.
func (g graph) unreached(s int) int {
	seed := make([]bool, len(g.ptr)-1)
	seed[s] = true
	return g.unreachedFrom(seed)
}

// unreachedFrom returns the lowest node not reachable from any node i with
// seed[i] (a seed reaches itself), or -1. seed is not modified.
func (g graph) unreachedFrom(seed []bool) int {
	seen := append([]bool(nil), seed...)
	var stack []int
	for i, ok := range seen {
		if ok {
			stack = append(stack, i)
		}
	}
	for len(stack) > 0 {
		i := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		for _, j := range g.adj(i) {
			if !seen[j] {
				seen[j] = true
				stack = append(stack, j)
			}
		}
	}
	for i, ok := range seen {
		if !ok {
			return i
		}
	}
	return -1
}

// CannotReach returns the lowest row i of the square matrix p from which no
// target row can be reached, or -1 if every row reaches one. Row j is
// reachable from row i when there is a path i = i0, i1, ..., ik = j (k >= 0)
// with p[i_l][i_(l+1)] > 0 at every step; in particular a target row reaches
// itself. Only the stored entries that are positive are edges: explicit
// zeros, negative and NaN entries are not.
//
// Taking as target the rows of a sub-stochastic p that lose mass (row sum
// below 1), CannotReach(p, target) == -1 says that p is the transient block
// of an absorbing chain: p^t -> 0, so I - p is non-singular and
// (I - p)^-1 = sum_t p^t exists (Grinstead & Snell, Introduction to
// Probability, ch. 11, Theorems 11.3 and 11.4). Fundamental makes this
// check (with the rows whose sum is below 1 - 1e-12 t); a row it returns
// lies in or leads only into a closed class of p.
//
// CannotReach searches the reversed edges from the target rows, in
// O(n + nnz) time and memory. It panics if p is not square or
// len(target) != n.
func CannotReach(p *CSR, target []bool) int {
	n, c := p.Dims()
	if n != c {
		panic(fmt.Sprintf("linalg: cannot reach: p is %dx%d, not square", n, c))
	}
	if len(target) != n {
		panic(fmt.Sprintf("linalg: cannot reach: len(target) = %d, want %d", len(target), n))
	}
	g := graph{ptr: make([]int, n+1)}
	for i := 0; i < n; i++ {
		ind, val := p.Row(i)
		for k, j := range ind {
			if val[k] > 0 {
				g.ind = append(g.ind, j)
			}
		}
		g.ptr[i+1] = len(g.ind)
	}
	return g.reversed().unreachedFrom(target)
}
