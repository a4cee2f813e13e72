package linalg

import (
	"fmt"
	"math"
	"sort"
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
	for w := 0; w < len(s.bounds)-1; w++ {
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

// op sets dst = K src and returns dst.dot and dst.dst: K = A for Jacobi
// preconditioning and K = (D + L_b)^-1 A (D + U_b)^-1 for SGS.
func (s *IterSolver) op(dst, src, dot []float64) (float64, float64) {
	s.opDst, s.opSrc, s.opDot = dst, src, dot
	if !s.sgs {
		o := s.forBlocks((*IterSolver).applyA)
		return o[0], o[1]
	}
	s.forBlocks((*IterSolver).sweepUpper)
	o := s.forBlocks((*IterSolver).sweepLower)
	return o[0], o[1]
}

// applyA sets opDst = A opSrc (Jacobi: K = A) and returns opDst.opDot
// and opDst.opDst.
func (s *IterSolver) applyA(lo, hi int) (o [2]float64) {
	p, g := s.p, s.gamma
	ptr, ind, val := s.ptr32, s.ind32, p.Val
	dst, src, dot := s.opDst[:hi], s.opSrc, s.opDot[:hi]
	var dd, d2 float64
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

// sweepUpper sets t = (D + U_b)^-1 opSrc, the first half of K opSrc
// (SGS), backward over the block.
func (s *IterSolver) sweepUpper(lo, hi int) (o [2]float64) {
	p, g := s.p, s.gamma
	ptr, ind, val := s.ptr32, s.ind32, p.Val
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
	return o
}

// sweepLower completes K opSrc (SGS) from t, writing it to opDst, and
// returns opDst.opDot and opDst.opDst.
func (s *IterSolver) sweepLower(lo, hi int) (o [2]float64) {
	p, g := s.p, s.gamma
	ptr, ind, val := s.ptr32, s.ind32, p.Val
	dst, src, dot := s.opDst[:hi], s.opSrc, s.opDot[:hi]
	var dd, d2 float64
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
	return o
}

// rhs sets r = bh, the right-hand side of the split system: (D + L_b)^-1 b
// for SGS, b for Jacobi.
func (s *IterSolver) rhs(lo, hi int) (o [2]float64) {
	p, g := s.p, s.gamma
	ptr, ind, val := s.ptr32, s.ind32, p.Val
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
	return o
}

// toX maps y to x = (D + U_b)^-1 y in place (SGS), backward over the block.
func (s *IterSolver) toX(lo, hi int) (o [2]float64) {
	p, g := s.p, s.gamma
	ptr, ind, val := s.ptr32, s.ind32, p.Val
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
	return o
}

// toY maps x to y = (D + U_b) x in place (SGS), forward over the block.
func (s *IterSolver) toY(lo, hi int) (o [2]float64) {
	p, g := s.p, s.gamma
	ptr, ind, val := s.ptr32, s.ind32, p.Val
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
	return o
}
