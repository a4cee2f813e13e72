package skills

import (
	"errors"
	"fmt"

	"github.com/successor-go/successor/internal/errs"
)

// Sentinel errors. Every error returned by this package wraps one of these,
// so callers can branch with errors.Is. ErrConfig, ErrDimension,
// ErrNonFinite, ErrDiverged and ErrCorrupt are the library's shared
// sentinels: linalg, sf, usf and the other packages re-export the same
// values under the same names, so errors.Is works across packages.
var (
	// ErrConfig: a configuration value is out of its allowed range.
	ErrConfig = errs.Config
	// ErrDimension: lengths of arguments do not agree.
	ErrDimension = errs.Dimension
	// ErrNonFinite: an input contains NaN or an infinity.
	ErrNonFinite = errs.NonFinite
	// ErrDiverged: a learner produced a non-finite loss, gradient or weight.
	ErrDiverged = errs.Diverged
	// ErrCorrupt: saved data cannot be loaded: truncated, trailing bytes, a
	// wrong magic, an unsupported version, a checksum mismatch, or contents
	// out of range (sizes, non-finite weights, a step count too large).
	ErrCorrupt = errs.Corrupt
	// ErrUnsupported: an operation is not available for this value, such
	// as freezing a Discriminator that cannot be copied.
	ErrUnsupported = errors.New("unsupported")
	// ErrEmpty: an estimate was asked of no samples.
	ErrEmpty = errors.New("no samples")
)

// DivergenceError reports the update at which a discriminator stopped being
// finite. It wraps ErrDiverged. The discriminator's weights are left as they
// were before the failing update when the gradient was the culprit; a
// non-finite loss is reported before any weight is changed.
type DivergenceError struct {
	Step int     // 1-based index of the failing update
	Loss float64 // loss of the failing minibatch
}

// Error returns the message, naming the update and its loss.
func (e *DivergenceError) Error() string {
	return fmt.Sprintf("skills: update %d: non-finite loss or gradient (loss %g): %v", e.Step, e.Loss, ErrDiverged)
}

// Unwrap returns ErrDiverged.
func (e *DivergenceError) Unwrap() error { return ErrDiverged }
