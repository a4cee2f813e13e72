package gpi

import (
	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/gonum"
)

// gemvMin is the size actions*dim from which scores calls gonum's
// matrix-vector product (assembly on amd64) instead of the Go loop, whose
// lower call overhead wins on small inputs.
const gemvMin = 64

// dot returns the inner product of x and y, which have the same length.
func dot(x, y []float64) float64 {
	var s0, s1, s2, s3 float64
	n := len(x)
	y = y[:n]
	i := 0
	for ; i <= n-4; i += 4 {
		xx := x[i : i+4 : i+4]
		yy := y[i : i+4 : i+4]
		s0 += xx[0] * yy[0]
		s1 += xx[1] * yy[1]
		s2 += xx[2] * yy[2]
		s3 += xx[3] * yy[3]
	}
	for ; i < n; i++ {
		s0 += x[i] * y[i]
	}
	return (s0 + s1) + (s2 + s3)
}

// scores writes q[a] = psi[a*d : (a+1)*d] . w for every action a, where
// d = len(w) and len(psi) = len(q)*d: the product of the row-major
// len(q) x d matrix psi with w.
func scores(q, psi, w []float64) {
	d := len(w)
	if len(psi) >= gemvMin {
		gonum.Implementation{}.Dgemv(blas.NoTrans, len(q), d, 1, psi, d, w, 1, 0, q, 1)
		return
	}
	for a := range q {
		q[a] = dot(psi[a*d:(a+1)*d], w)
	}
}
