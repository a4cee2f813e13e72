package linalg

// IterSettings configures the iterative solver. The zero value (or nil)
// means the documented defaults.
type IterSettings struct {
	// Tol is the relative residual ||b - (I - gamma P) x|| / ||b|| at which
	// the solver stops. 0 means 1e-8.
	Tol float64
	// MaxIter bounds the iterations. 0 means 10000.
	MaxIter int
}

// IterResult reports what the iterative solver achieved.
type IterResult struct {
	Iterations int     // iterations taken
	Residual   float64 // achieved relative residual
}

// SolveIterative solves (I - gamma P) x = b for a square CSR P and gamma in
// [0, 1), writing x into dst (len n). It returns an error wrapping
// ErrNotConverged, with the achieved residual, if the tolerance is not met.
//
// PLACEHOLDER implementation (fixed-point iteration x = b + gamma P x); the
// linalg issue replaces it with a Krylov method.
func SolveIterative(dst []float64, p *CSR, gamma float64, b []float64, s *IterSettings) (IterResult, error) {
	n := p.rows
	tol, maxIter := 1e-8, 100000
	if s != nil && s.Tol > 0 {
		tol = s.Tol
	}
	var nb float64
	for _, v := range b {
		nb += v * v
	}
	tmp := make([]float64, n)
	copy(dst, b)
	var res float64
	for it := 1; it <= maxIter; it++ {
		p.MulVecTo(tmp, dst)
		var d float64
		for i := range dst {
			v := b[i] + gamma*tmp[i]
			d += (v - dst[i]) * (v - dst[i])
			dst[i] = v
		}
		if nb == 0 || d <= tol*tol*nb*(1-gamma)*(1-gamma) {
			res = d
			return IterResult{Iterations: it, Residual: res}, nil
		}
	}
	return IterResult{Iterations: maxIter, Residual: res}, ErrNotConverged
}
