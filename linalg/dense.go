package linalg

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// CheckStochastic returns nil if p is square, finite, non-negative, and every
// row sums to 1 within tol. Otherwise it returns an error wrapping
// ErrDimension, ErrNonFinite or a *RowSumError (ErrNotStochastic).
func CheckStochastic(p mat.Matrix, tol float64) error {
	r, c := p.Dims()
	if r != c {
		return fmt.Errorf("linalg: check stochastic: %dx%d not square: %w", r, c, ErrDimension)
	}
	for i := 0; i < r; i++ {
		var s float64
		for j := 0; j < c; j++ {
			v := p.At(i, j)
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("linalg: check stochastic: entry (%d,%d): %w", i, j, ErrNonFinite)
			}
			if v < 0 {
				return &RowSumError{Row: i, Neg: true}
			}
			s += v
		}
		if math.Abs(s-1) > tol {
			return &RowSumError{Row: i, Sum: s}
		}
	}
	return nil
}

// Successor sets dst to M = (I - gamma P)^-1 for a square p and gamma in
// [0, 1). dst is resized if empty.
//
// PLACEHOLDER implementation (plain gonum LU); the linalg issue replaces it.
func Successor(dst *mat.Dense, p mat.Matrix, gamma float64) error {
	n, _ := p.Dims()
	return SolveSuccessor(dst, p, gamma, eye(n))
}

// SolveSuccessor solves (I - gamma P) X = B for X, storing X in dst, with one
// factorisation for all columns of B.
//
// PLACEHOLDER implementation (plain gonum LU); the linalg issue replaces it.
func SolveSuccessor(dst *mat.Dense, p mat.Matrix, gamma float64, b mat.Matrix) error {
	if !(gamma >= 0 && gamma < 1) {
		return fmt.Errorf("linalg: solve successor: gamma %v outside [0, 1): %w", gamma, ErrDiscount)
	}
	n, c := p.Dims()
	if n != c {
		return fmt.Errorf("linalg: solve successor: %w", ErrDimension)
	}
	a := mat.NewDense(n, n, nil)
	a.Scale(-gamma, p)
	for i := 0; i < n; i++ {
		a.Set(i, i, a.At(i, i)+1)
	}
	var lu mat.LU
	lu.Factorize(a)
	if err := lu.SolveTo(dst, false, b); err != nil {
		return fmt.Errorf("linalg: solve successor: %w", ErrSingular)
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
