package sf

import (
	"errors"
	"fmt"

	"github.com/successor-go/successor/internal/errs"
)

// Sentinel errors. Errors returned by this package wrap one of these (or a
// linalg sentinel for a failed solve or a policy that is not a
// distribution), so callers can branch with errors.Is. All but
// ErrZeroVector are the library's shared sentinels: linalg, mdp, gpi and
// the other packages re-export the same values under the same names, so
// errors.Is(err, sf.ErrDimension) and errors.Is(err, linalg.ErrDimension)
// are the same test.
var (
	// ErrDimension: sizes of arguments do not agree.
	ErrDimension = errs.Dimension
	// ErrNonFinite: an input or a learned value is NaN or infinite.
	ErrNonFinite = errs.NonFinite
	// ErrDiscount: a discount factor is outside its allowed range.
	ErrDiscount = errs.Discount
	// ErrConfig: a settings field or a parameter has an invalid value (a
	// step size, a trace, a target, a regularisation strength, a missing
	// policy or task).
	ErrConfig = errs.Config
	// ErrDiverged: a learner produced a non-finite value.
	ErrDiverged = errs.Diverged
	// ErrCorrupt: saved data are truncated, altered, of another format or
	// version, or out of range.
	ErrCorrupt = errs.Corrupt
	// ErrZeroVector: a vector of zero length cannot be projected to the
	// unit sphere.
	ErrZeroVector = errors.New("zero vector")
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
