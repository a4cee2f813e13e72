package linalg

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// Ridge sets dst to the ridge-regression weights
//
//	w = argmin_w ||X w - y||^2 + lambda ||w||^2
//
// for X (m x d) and y (length m), and returns the residual sum of squares
// ||X w - y||^2 (the penalty not included). If dst is empty it is resized
// to d; otherwise it must have length d.
//
// Ridge solves the augmented least-squares problem
// [X; sqrt(lambda) I] w ~ [y; 0] by Householder QR (gonum mat.QR), which
// avoids squaring the condition number as the normal equations
// X^T X + lambda I would; with lambda = 0 it is plain QR least squares. It
// costs O((m + d) d^2) time and O((m + d) d) memory.
//
// Errors wrap ErrConfig (lambda < 0 or NaN or Inf), ErrDimension
// (d = 0, len(y) != m, or dst of the wrong length), ErrNonFinite (NaN or Inf
// in X or y), or ErrRankDeficient, which wraps ErrSingular, when lambda = 0
// and X does not have full column rank to working precision (in particular
// when m < d): a diagonal entry of R below max(m, d) eps max|R_kk|.
func Ridge(dst *mat.VecDense, x mat.Matrix, y mat.Vector, lambda float64) (residual float64, err error) {
	if !(lambda >= 0) || math.IsInf(lambda, 1) {
		return 0, fmt.Errorf("linalg: ridge: lambda %v: %w", lambda, ErrConfig)
	}
	m, d := x.Dims()
	if d == 0 {
		return 0, fmt.Errorf("linalg: ridge: no columns: %w", ErrDimension)
	}
	if y.Len() != m {
		return 0, fmt.Errorf("linalg: ridge: len(y) = %d, want %d: %w", y.Len(), m, ErrDimension)
	}
	if !dst.IsEmpty() && dst.Len() != d {
		return 0, fmt.Errorf("linalg: ridge: dst has length %d, want %d: %w", dst.Len(), d, ErrDimension)
	}
	if err := checkFinite(x); err != nil {
		return 0, fmt.Errorf("linalg: ridge: x: %w", err)
	}
	if err := checkFinite(y); err != nil {
		return 0, fmt.Errorf("linalg: ridge: y: %w", err)
	}
	rows := m
	if lambda > 0 {
		rows += d
	}
	if rows < d {
		return 0, fmt.Errorf("linalg: ridge: %d samples for %d weights with lambda = 0: %w", m, d, ErrRankDeficient)
	}
	a := mat.NewDense(rows, d, nil)
	if m > 0 {
		a.Slice(0, m, 0, d).(*mat.Dense).Copy(x)
	}
	rhs := mat.NewVecDense(rows, nil)
	for i := 0; i < m; i++ {
		rhs.SetVec(i, y.AtVec(i))
	}
	if lambda > 0 {
		sl := math.Sqrt(lambda)
		for k := 0; k < d; k++ {
			a.Set(m+k, k, sl)
		}
	}
	var qr mat.QR
	qr.Factorize(a)
	var r mat.Dense
	qr.RTo(&r)
	var rmax float64
	for k := 0; k < d; k++ {
		rmax = max(rmax, math.Abs(r.At(k, k)))
	}
	thresh := float64(max(m, d)) * 0x1p-52 * rmax
	for k := 0; k < d; k++ {
		if !(math.Abs(r.At(k, k)) > thresh) {
			return 0, fmt.Errorf("linalg: ridge: column %d dependent on the others: %w", k, ErrRankDeficient)
		}
	}
	var w mat.VecDense
	if err := qr.SolveVecTo(&w, false, rhs); err != nil {
		return 0, fmt.Errorf("linalg: ridge: %v: %w", err, ErrRankDeficient)
	}
	if dst.IsEmpty() {
		dst.ReuseAsVec(d)
	}
	dst.CopyVec(&w)
	var res mat.VecDense
	res.MulVec(x, dst)
	for i := 0; i < m; i++ {
		e := res.AtVec(i) - y.AtVec(i)
		residual += e * e
	}
	return residual, nil
}

// RLS is a recursive least-squares estimator: after the samples
// (x_1, y_1) .. (x_n, y_n) its weights are exactly the ridge solution
//
//	w_n = argmin_w sum_j (y_j - x_j . w)^2 + lambda ||w||^2
//
// (up to rounding), updated in O(d^2) per sample with no allocation. It
// keeps P_n = (lambda I + sum_j x_j x_j^T)^-1, starting from P_0 = I/lambda,
// and applies the Sherman-Morrison update (Haykin, Adaptive Filter Theory,
// ch. 10, with forgetting factor 1):
//
//	k = P x / (1 + x^T P x),  e = y - x . w,  w += k e,  P -= k (P x)^T.
//
// The minimal penalised cost J_n = sum_j (y_j - x_j . w_n)^2 + lambda ||w_n||^2
// follows the recursion J_n = J_{n-1} + e^2 / (1 + x^T P x).
type RLS struct {
	d      int
	lambda float64
	w      []float64
	p      []float64 // d x d, row-major, symmetric
	px     []float64
	n      int
	cost   float64
}

// MaxRLSDim bounds the number of weights of an RLS estimator: it keeps a
// d x d matrix, 2 GiB at d = 2^14.
const MaxRLSDim = 1 << 14

// NewRLS returns an estimator of d weights with ridge strength lambda.
// Errors wrap ErrDimension (d < 1 or d > MaxRLSDim) or ErrConfig (lambda
// not positive and finite, with 1/lambda finite: P_0 = I/lambda).
func NewRLS(d int, lambda float64) (*RLS, error) {
	if d < 1 || d > MaxRLSDim {
		return nil, fmt.Errorf("linalg: rls: %d weights, want 1..%d: %w", d, MaxRLSDim, ErrDimension)
	}
	if !(lambda > 0) || math.IsInf(lambda, 1) || math.IsInf(1/lambda, 1) {
		return nil, fmt.Errorf("linalg: rls: lambda %v must be positive and finite: %w", lambda, ErrConfig)
	}
	r := &RLS{d: d, lambda: lambda, w: make([]float64, d), p: make([]float64, d*d), px: make([]float64, d)}
	r.Reset()
	return r, nil
}

// Reset forgets all samples: w = 0, P = I/lambda.
func (r *RLS) Reset() {
	clear(r.w)
	clear(r.p)
	for i := 0; i < r.d; i++ {
		r.p[i*r.d+i] = 1 / r.lambda
	}
	r.n, r.cost = 0, 0
}

// Update adds the sample (x, y). It returns an error wrapping ErrNonFinite,
// and leaves the estimator unchanged, if x or y holds NaN or Inf or the
// update would produce a non-finite value from finite inputs (features of
// 1e200 overflow x^T P x; a huge residual overflows the weights or the
// cost). It panics if len(x) is not the estimator's dimension. It does not
// allocate.
func (r *RLS) Update(x []float64, y float64) error {
	d := r.d
	if len(x) != d {
		panic("linalg: rls: wrong sample length")
	}
	p, px, w := r.p, r.px, r.w
	var xpx, pred float64
	for i := 0; i < d; i++ {
		row := p[i*d : i*d+d]
		var s float64
		for j, v := range row {
			s += v * x[j]
		}
		px[i] = s
		xpx += x[i] * s
		pred += w[i] * x[i]
	}
	e := y - pred
	denom := 1 + xpx
	if !isFinite(e) || !isFinite(denom) {
		return fmt.Errorf("linalg: rls: sample %d: residual %v, 1 + x'Px = %v: %w", r.n+1, e, denom, ErrNonFinite)
	}
	inv := 1 / denom
	cost := r.cost + e*e*inv
	if !isFinite(cost) {
		return fmt.Errorf("linalg: rls: sample %d: cost overflows: %w", r.n+1, ErrNonFinite)
	}
	// The new weights, checked before anything changes (a defence: with
	// the cost finite a single step cannot overflow a weight, but a sum of
	// steps can). The downdate of P stays finite: |P x|_i |P x|_j /
	// (1 + x'Px) <= sqrt(P_ii P_jj) for positive semi-definite P
	// (Cauchy-Schwarz, derived by hand).
	for i := 0; i < d; i++ {
		if !isFinite(w[i] + px[i]*inv*e) {
			return fmt.Errorf("linalg: rls: sample %d: weight %d overflows: %w", r.n+1, i, ErrNonFinite)
		}
	}
	for i := 0; i < d; i++ {
		ki := px[i] * inv
		w[i] += ki * e
		// Symmetric rank-one downdate: P -= (P x)(P x)^T / denom.
		row := p[i*d : i*d+d]
		for j := i; j < d; j++ {
			v := row[j] - ki*px[j]
			row[j] = v
			p[j*d+i] = v
		}
	}
	r.cost = cost
	r.n++
	return nil
}

func isFinite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// Dim returns the number of weights d.
func (r *RLS) Dim() int { return r.d }

// Lambda returns the ridge strength.
func (r *RLS) Lambda() float64 { return r.lambda }

// Count returns the number of samples seen since construction or Reset.
func (r *RLS) Count() int { return r.n }

// Weights returns a view of the current weights. It must not be modified
// and changes with the next Update.
func (r *RLS) Weights() []float64 { return r.w }

// WeightsTo copies the weights into dst and returns it; a nil dst is
// allocated. It panics if dst is not nil and len(dst) != d.
func (r *RLS) WeightsTo(dst []float64) []float64 {
	if dst == nil {
		dst = make([]float64, r.d)
	}
	if len(dst) != r.d {
		panic("linalg: rls: wrong destination length")
	}
	copy(dst, r.w)
	return dst
}

// Cost returns the minimal penalised cost
// sum_j (y_j - x_j . w)^2 + lambda ||w||^2 over the samples seen.
func (r *RLS) Cost() float64 { return r.cost }

// RSS returns the residual sum of squares sum_j (y_j - x_j . w)^2 of the
// current weights on the samples seen, as Cost minus the penalty (clamped
// at 0 against rounding); it matches the residual returned by Ridge.
func (r *RLS) RSS() float64 {
	var ww float64
	for _, v := range r.w {
		ww += v * v
	}
	return max(0, r.cost-r.lambda*ww)
}
