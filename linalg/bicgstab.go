package linalg

import (
	"math"
	"math/rand/v2"
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
	s.forBlocks((*IterSolver).rhs)
	rr := s.forBlocks((*IterSolver).initR)[0]
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
		s.forBlocks((*IterSolver).biDir)
		rv, vv := s.op(s.v, s.phat, s.rhat)
		if math.IsNaN(rv) || math.IsInf(vv, 0) {
			return stNonFinite
		}
		if !(math.Abs(rv) > breakTol*rhatNorm*math.Sqrt(vv)) {
			return stBreakdown
		}
		alpha = rho / rv
		s.alpha = alpha
		ss := s.forBlocks((*IterSolver).biS)[0]
		if math.Sqrt(ss) <= target {
			s.forBlocks((*IterSolver).biUpdateHalf)
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
			s.forBlocks((*IterSolver).biUpdateHalf)
			return stBreakdown
		}
		omega = ts / tt
		s.omega = omega
		o := s.forBlocks((*IterSolver).biUpdate)
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

// biDir sets p = r + beta (p - omega v) and phat = w p.
func (s *IterSolver) biDir(lo, hi int) (o [2]float64) {
	pv, r, v, ph, w, beta, om := s.pv[:hi], s.r[:hi], s.v[:hi], s.phat[:hi], s.w[:hi], s.beta, s.omega
	for i := lo; i < hi; i++ {
		t := r[i] + beta*(pv[i]-om*v[i])
		pv[i] = t
		ph[i] = w[i] * t
	}
	return o
}

// biS sets s = r - alpha v (s in q) and shat = w s, and returns s.s.
func (s *IterSolver) biS(lo, hi int) (o [2]float64) {
	r, v, q, sh, w, a := s.r[:hi], s.v[:hi], s.q[:hi], s.shat[:hi], s.w[:hi], s.alpha
	var ss float64
	for i := lo; i < hi; i++ {
		t := r[i] - a*v[i]
		q[i] = t
		sh[i] = w[i] * t
		ss += t * t
	}
	o[0] = ss
	return o
}

// biUpdate sets y += alpha phat + omega shat and r = s - omega t (t is in
// r, s in q), and returns rhat.r and r.r.
func (s *IterSolver) biUpdate(lo, hi int) (o [2]float64) {
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
	return o
}

// biUpdateHalf sets y += alpha phat.
func (s *IterSolver) biUpdateHalf(lo, hi int) (o [2]float64) {
	y, ph, a := s.x[:hi], s.phat[:hi], s.alpha
	for i := lo; i < hi; i++ {
		y[i] += a * ph[i]
	}
	return o
}
