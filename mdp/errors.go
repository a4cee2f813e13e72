package mdp

import "github.com/successor-go/successor/internal/errs"

// Sentinel errors. Errors returned by this package wrap one of these or a
// linalg sentinel (linalg.ErrNotStochastic for probabilities that are not
// a distribution, linalg.ErrSingular, linalg.ErrNotAbsorbing and
// linalg.ErrNotConverged from the oracles' solves), so callers can branch
// with errors.Is. They are the library's shared sentinels: linalg, sf, gpi
// and the other packages re-export the same values under the same names.
var (
	// ErrDimension: sizes do not agree (a start distribution, terminal
	// flags, labels or weights of the wrong length) or are out of range
	// (no states, more than MaxRows state-action pairs).
	ErrDimension = errs.Dimension
	// ErrNonFinite: a probability, reward or computed value is NaN or
	// infinite.
	ErrNonFinite = errs.NonFinite
	// ErrDiscount: a discount factor is outside [0, 1], or is 1 where some
	// state never reaches a terminal state.
	ErrDiscount = errs.Discount
	// ErrConfig: a description or option passed to a constructor is
	// invalid: an index out of range, a terminal state with outgoing mass,
	// an empty start distribution, a malformed grid layout (a
	// *LayoutError), a bad label or slip, duplicate rewards, or a nil MDP,
	// policy or reward.
	ErrConfig = errs.Config
	// ErrCorrupt: an MDP file cannot be read as one: bad JSON, an unknown
	// field, trailing data, a wrong format name or version, a non-integer
	// index, or a checksum that does not match. A file that parses but
	// describes an invalid MDP gives the errors New gives instead.
	ErrCorrupt = errs.Corrupt
)
