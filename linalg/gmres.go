package linalg

import "math"

// defaultRestart is GMRES's restart length m when IterConfig.Restart is 0.
const defaultRestart = 30

// MaxRestart is the largest restart length of GMRES(m) (IterConfig.Restart),
// so that a configuration cannot ask for more than MaxRestart + 1 basis
// vectors.
const MaxRestart = 1000

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
		s.forBlocks((*IterSolver).rhs)
		rr := s.forBlocks((*IterSolver).initR)[0]
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
		s.forBlocks((*IterSolver).scaleW) // v0 = r/beta, phat = w v0
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
				o := s.forBlocks((*IterSolver).mgs)
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
			s.forBlocks((*IterSolver).scaleW) // v_{k+1} = w/hn, phat = w v_{k+1}
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
			s.forBlocks((*IterSolver).gmresUpdate)
		}
		if st != stMaxIter || res.Iterations >= maxIter {
			return st
		}
	}
}

// scaleW sets opDst = alpha opSrc and phat = w opDst.
func (s *IterSolver) scaleW(lo, hi int) (o [2]float64) {
	dst, src, ph, w, a := s.opDst[:hi], s.opSrc[:hi], s.phat[:hi], s.w[:hi], s.alpha
	for i := lo; i < hi; i++ {
		v := a * src[i]
		dst[i] = v
		ph[i] = w[i] * v
	}
	return o
}

// mgs sets opDst -= alpha opSrc (a modified Gram-Schmidt step) and returns
// opDst.opDot (0 when opDot is nil) and opDst.opDst.
func (s *IterSolver) mgs(lo, hi int) (o [2]float64) {
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
	return o
}

// gmresUpdate sets y += w (V c), V the first gk basis vectors and c their
// coefficients in gv, with pv as scratch.
func (s *IterSolver) gmresUpdate(lo, hi int) (o [2]float64) {
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
	return o
}
