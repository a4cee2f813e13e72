// Package testtol holds the tolerance tiers shared by the tests of this
// library, so that a name means the same number in every package (common
// practice, as in the math package's tests, which name theirs by tier).
// Each is a relative tolerance unless a test says otherwise.
//
// A test whose check needs a tolerance outside these tiers (a value
// printed to one decimal in a book, a finite-difference gradient, a bound
// on accumulated round-off) declares its own constant beside the check,
// with the reason.
package testtol

const (
	// Exact is for direct solves of well-conditioned systems, closed forms
	// and the same arithmetic done in another order: 1e-12.
	Exact = 1e-12
	// Solve is for exact solves compared across methods or accumulated
	// over many states and steps, where the round-off of each solve
	// (about the condition number times 1e-16) adds up: 1e-10.
	Solve = 1e-10
	// Iter is for iterative solves run to a relative residual of 1e-8
	// (the default Tol of linalg's iterative solver) or below: 1e-8.
	Iter = 1e-8
	// TD is for estimates learned from samples (TD and its relatives)
	// compared with the exact oracle, relative to the largest entry: a few
	// per cent, 2e-2.
	TD = 2e-2
)
