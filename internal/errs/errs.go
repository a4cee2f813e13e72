// Package errs declares, once, the error conditions that more than one
// package of this library reports, so that errors.Is gives the same answer
// whichever package's name a caller uses.
//
// Each public package re-exports the ones it can return under one spelling,
// the same everywhere:
//
//	ErrDimension = errs.Dimension
//	ErrNonFinite = errs.NonFinite
//	ErrDiscount  = errs.Discount
//	ErrConfig    = errs.Config
//	ErrDiverged  = errs.Diverged
//	ErrCorrupt   = errs.Corrupt
//
// so errors.Is(err, sf.ErrDimension) and errors.Is(err, linalg.ErrDimension)
// are the same test. Conditions that only one package reports (a matrix
// that is not stochastic, a singular system, a violated GPI bound, a zero
// vector, no samples) stay with that package.
//
// The messages are bare ("dimension mismatch"); the packages wrap them with
// their own prefix and the operation ("sf: td: ...: dimension mismatch").
package errs

//lint:file-ignore ST1012 the sentinels are read qualified (errs.Dimension); the packages re-export them as ErrDimension etc.

import "errors"

var (
	// Dimension: the sizes or lengths of arguments do not agree, or a size
	// is out of its allowed range.
	Dimension = errors.New("dimension mismatch")

	// NonFinite: an input, or a computed value that must be finite, is NaN
	// or an infinity.
	NonFinite = errors.New("non-finite value")

	// Discount: a discount factor gamma is outside its allowed range (or
	// gamma = 1 where the problem has no finite answer).
	Discount = errors.New("bad discount")

	// Config: a configuration value, an option or a description passed to
	// a constructor is invalid: a step size, a regularisation strength or a
	// width out of range, an unknown method, a nil argument that is
	// required, an index out of range in a model description.
	Config = errors.New("invalid configuration")

	// Diverged: a learner produced a non-finite value (loss, gradient,
	// weight or successor feature).
	Diverged = errors.New("diverged")

	// Corrupt: saved data cannot be loaded: truncated, trailing bytes, a
	// wrong magic, an unsupported format version, a checksum mismatch, or
	// contents out of range (sizes that overflow or exceed a cap, negative
	// counts, settings outside their domain).
	Corrupt = errors.New("corrupt data")
)
