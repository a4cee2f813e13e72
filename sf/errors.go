package sf

import (
	"errors"
	"fmt"

	"github.com/successor-go/successor/linalg"
)

// Sentinel errors. Errors returned by this package wrap one of these (or a
// linalg sentinel for a failed solve), so callers can branch with errors.Is.
var (
	// ErrDimension: sizes of arguments do not agree. It is linalg's
	// sentinel, so errors.Is works across the two packages.
	ErrDimension = linalg.ErrDimension
	// ErrNonFinite: an input or a learned value is NaN or infinite.
	ErrNonFinite = linalg.ErrNonFinite
	// ErrDiscount: a discount factor is outside its allowed range.
	ErrDiscount = linalg.ErrDiscount
	// ErrDiverged: a learner produced a non-finite value.
	ErrDiverged = errors.New("diverged")
	// ErrCorrupt: a saved file is truncated, altered or not of this format.
	ErrCorrupt = errors.New("corrupt file")
	// ErrZeroVector: a vector of zero length cannot be projected to the
	// unit sphere.
	ErrZeroVector = errors.New("zero vector")
	// ErrSettings: a settings field has an invalid value.
	ErrSettings = errors.New("invalid settings")
)

// DivergenceError reports the update at which a learner first produced a
// non-finite value. It wraps ErrDiverged.
type DivergenceError struct {
	Learner string // "td" or "linear"
	Step    int    // 1-based index of the offending update
	State   int    // state of the updated pair
	Action  int    // action of the updated pair
}

// Error returns the message, naming the learner, update and pair.
func (e *DivergenceError) Error() string {
	return fmt.Sprintf("sf: %s: non-finite value at update %d (state %d, action %d): %v",
		e.Learner, e.Step, e.State, e.Action, ErrDiverged)
}

// Unwrap returns ErrDiverged.
func (e *DivergenceError) Unwrap() error { return ErrDiverged }
