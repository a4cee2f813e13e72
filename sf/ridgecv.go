package sf

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// RidgeCV chooses the ridge penalty lambda of InferTask from grid by
// leave-one-group-out cross-validation, in closed form. The samples come
// in groups that share their features: row c of phis (m x d) holds the
// features phi_c of group c, counts[c] = m_c > 0 its number of samples and
// sums[c] the sum of their rewards. (With features of the next state only,
// a group is a distinct next state.) Ridge regression on the samples is
// then the weighted regression on the groups, and holding group c out
// changes the fit by a rank-one update (Sherman-Morrison), so that
//
//	CV(lambda) = sum_c ((rbar_c - phi_c . w) / (1 - m_c phi_c' A^-1 phi_c))^2,
//	A = sum_c m_c phi_c phi_c' + lambda I,   A w = sum_c sums[c] phi_c,
//
// with rbar_c = sums[c] / m_c, is the squared error of predicting each
// group's mean reward from a fit without that group (Hastie, Tibshirani &
// Friedman, The Elements of Statistical Learning, 2nd ed., section 7.10,
// with the held-out unit a group). It scores how well a fit predicts
// features it has not seen.
//
// RidgeCV returns the lambda of the smallest CV (ties to the later grid
// entry: the larger penalty of an ascending grid) and that CV divided by
// the number of groups, the mean squared leave-one-group-out error. A
// penalty whose A is not positive definite, or that leaves a group with
// all the weight (m_c phi_c' A^-1 phi_c >= 1 - 1e-12), scores +Inf; if no
// penalty scores a finite CV, the CV returned is +Inf. The cost is
// O(m d^2) to form A and, per penalty, a Cholesky factorisation O(d^3) and
// m solves O(m d^2).
//
// Errors wrap ErrDimension (no groups, an empty grid, lengths that do not
// match), ErrNonFinite (a non-finite feature, count or sum) or
// ErrConfig (a count or a penalty that is not positive and
// finite).
func RidgeCV(phis mat.Matrix, counts, sums, grid []float64) (lambda, cv float64, err error) {
	m, d := phis.Dims()
	switch {
	case m == 0 || d == 0:
		return 0, 0, fmt.Errorf("sf: ridge cv: %d groups of %d features: %w", m, d, ErrDimension)
	case len(counts) != m || len(sums) != m:
		return 0, 0, fmt.Errorf("sf: ridge cv: %d counts and %d sums for %d groups: %w", len(counts), len(sums), m, ErrDimension)
	case len(grid) == 0:
		return 0, 0, fmt.Errorf("sf: ridge cv: empty grid: %w", ErrDimension)
	}
	for _, lam := range grid {
		if !(lam > 0) || math.IsInf(lam, 0) {
			return 0, 0, fmt.Errorf("sf: ridge cv: grid penalty %v: %w", lam, ErrConfig)
		}
	}
	x := mat.DenseCopyOf(phis)
	for c := range m {
		if !(counts[c] > 0) || math.IsInf(counts[c], 0) {
			return 0, 0, fmt.Errorf("sf: ridge cv: count %v of group %d: %w", counts[c], c, ErrConfig)
		}
		if math.IsNaN(sums[c]) || math.IsInf(sums[c], 0) {
			return 0, 0, fmt.Errorf("sf: ridge cv: reward sum of group %d: %w", c, ErrNonFinite)
		}
		for _, v := range x.RawRowView(c) {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return 0, 0, fmt.Errorf("sf: ridge cv: features of group %d: %w", c, ErrNonFinite)
			}
		}
	}

	var g mat.SymDense
	g.ReuseAsSym(d)
	b := mat.NewVecDense(d, nil)
	for c := range m {
		row := x.RawRowView(c)
		for i := range d {
			b.SetVec(i, b.AtVec(i)+sums[c]*row[i])
			for j := i; j < d; j++ {
				g.SetSym(i, j, g.At(i, j)+counts[c]*row[i]*row[j])
			}
		}
	}
	best, bestLam := math.Inf(1), grid[0]
	a := mat.NewSymDense(d, nil)
	var chol mat.Cholesky
	var w, v mat.VecDense
	for _, lam := range grid {
		a.CopySym(&g)
		for i := range d {
			a.SetSym(i, i, a.At(i, i)+lam)
		}
		if !chol.Factorize(a) {
			continue
		}
		if err := chol.SolveVecTo(&w, b); err != nil {
			continue
		}
		var sum float64
		for c := range m {
			xc := mat.NewVecDense(d, x.RawRowView(c))
			if err := chol.SolveVecTo(&v, xc); err != nil {
				sum = math.Inf(1)
				break
			}
			h := counts[c] * mat.Dot(xc, &v)
			if h >= 1-1e-12 {
				sum = math.Inf(1)
				break
			}
			e := (sums[c]/counts[c] - mat.Dot(xc, &w)) / (1 - h)
			sum += e * e
		}
		if sum <= best {
			best, bestLam = sum, lam
		}
	}
	return bestLam, best / float64(m), nil
}
