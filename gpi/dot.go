package gpi

import (
	"github.com/successor-go/successor/internal/vec"
	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/gonum"
)

// gemvMin is the size actions*dim from which scores calls gonum's
// matrix-vector product (assembly on amd64) instead of the Go loop, whose
// lower call overhead wins on small inputs.
const gemvMin = 64

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
		q[a] = vec.Dot(psi[a*d:(a+1)*d], w)
	}
}
