package linalg

import (
	"errors"
	"fmt"

	"github.com/successor-go/successor/internal/errs"
)

// Sentinel errors. Every error returned by this package wraps one of these,
// so callers can branch with errors.Is. ErrDimension, ErrNonFinite,
// ErrDiscount and ErrConfig are the library's shared sentinels: every
// package that reports these conditions re-exports the same values, so
// errors.Is(err, linalg.ErrDimension) and errors.Is(err, sf.ErrDimension)
// are the same test.
var (
	// ErrDimension: shapes of arguments do not agree.
	ErrDimension = errs.Dimension
	// ErrNonFinite: an input contains NaN or an infinity.
	ErrNonFinite = errs.NonFinite
	// ErrDiscount: a discount factor is outside its allowed range.
	ErrDiscount = errs.Discount
	// ErrConfig: a parameter, such as a regularisation strength, or a
	// setting, such as an unknown method, is outside its allowed range.
	ErrConfig = errs.Config

	// ErrNotStochastic: a matrix is not row-stochastic (negative entry or a
	// row that does not sum to 1 within tolerance).
	ErrNotStochastic = errors.New("not stochastic")
	// ErrSingular: a system matrix is singular or numerically singular.
	ErrSingular = errors.New("singular matrix")
	// ErrNotConverged: an iterative method stopped before reaching its tolerance.
	ErrNotConverged = errors.New("not converged")
	// ErrNotAbsorbing: some transient state of a chain cannot reach an
	// absorbing state (the transient block holds a closed class).
	ErrNotAbsorbing = errors.New("not absorbing")
	// ErrReducible: a chain is not irreducible (some state cannot reach
	// some other state).
	ErrReducible = errors.New("reducible chain")
	// ErrRankDeficient: a least-squares design matrix does not have full
	// column rank. It wraps ErrSingular, so errors.Is(err, ErrSingular)
	// holds for it too.
	ErrRankDeficient error = rankDeficient{}
)

type rankDeficient struct{}

// Error returns "rank deficient".
func (rankDeficient) Error() string { return "rank deficient" }

// Unwrap returns ErrSingular.
func (rankDeficient) Unwrap() error { return ErrSingular }

// RowSumError reports a row of a matrix that is not a probability
// distribution. It wraps ErrNotStochastic.
type RowSumError struct {
	Row int     // index of the offending row
	Sum float64 // its sum
	Neg bool    // true when the row has a negative entry
}

// Error returns the message, naming the row and its sum or its negative
// entry.
func (e *RowSumError) Error() string {
	if e.Neg {
		return fmt.Sprintf("linalg: row %d has a negative entry", e.Row)
	}
	return fmt.Sprintf("linalg: row %d sums to %.17g, not 1", e.Row, e.Sum)
}

// Unwrap returns ErrNotStochastic.
func (e *RowSumError) Unwrap() error { return ErrNotStochastic }
