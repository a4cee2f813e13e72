package linalg

import "math"

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
	s.forBlocks((*IterSolver).rhs)
	o := s.forBlocks((*IterSolver).initR)
	rr, rz := o[0], o[1]
	if math.Sqrt(rr) <= target {
		return stConverged
	}
	s.beta = 0
	s.forBlocks((*IterSolver).cgDir)
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
		o := s.forBlocks((*IterSolver).cgUpdate)
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
			s.forBlocks((*IterSolver).cgDir)
		}
	}
	return stMaxIter
}

// cgDir sets the CG direction p = w r + beta p.
func (s *IterSolver) cgDir(lo, hi int) (o [2]float64) {
	pv, r, w, beta := s.pv[:hi], s.r[:hi], s.w[:hi], s.beta
	for i := lo; i < hi; i++ {
		pv[i] = w[i]*r[i] + beta*pv[i]
	}
	return o
}

// cgUpdate sets y += alpha p and r -= alpha q and returns r.w r and r.r.
func (s *IterSolver) cgUpdate(lo, hi int) (o [2]float64) {
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
	return o
}
