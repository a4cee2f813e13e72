package linalg

import "errors"

// Further sentinel errors, for the chain and least-squares routines.
var (
	// ErrNotAbsorbing: some transient state of a chain cannot reach an
	// absorbing state (the transient block holds a closed class).
	ErrNotAbsorbing = errors.New("not absorbing")
	// ErrReducible: a chain is not irreducible (some state cannot reach
	// some other state).
	ErrReducible = errors.New("reducible chain")
	// ErrBadParameter: a scalar parameter, such as a regularisation
	// strength, is outside its allowed range.
	ErrBadParameter = errors.New("bad parameter")
	// ErrRankDeficient: a least-squares design matrix does not have full
	// column rank. It wraps ErrSingular, so errors.Is(err, ErrSingular)
	// holds for it too.
	ErrRankDeficient = rankDeficient{}
)

type rankDeficient struct{}

func (rankDeficient) Error() string { return "rank deficient" }
func (rankDeficient) Unwrap() error { return ErrSingular }
