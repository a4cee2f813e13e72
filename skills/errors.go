package skills

import (
	"errors"
	"fmt"
)

// Sentinel errors. Every error returned by this package wraps one of these,
// so callers can branch with errors.Is.
var (
	// ErrConfig: a configuration value is out of its allowed range.
	ErrConfig = errors.New("bad config")
	// ErrDimension: lengths of arguments do not agree.
	ErrDimension = errors.New("dimension mismatch")
	// ErrNonFinite: an input contains NaN or an infinity.
	ErrNonFinite = errors.New("non-finite value")
	// ErrDiverged: a learner produced a non-finite loss, gradient or weight.
	ErrDiverged = errors.New("diverged")
	// ErrFormat: saved data are malformed (bad magic, truncated, inconsistent
	// sizes or trailing bytes).
	ErrFormat = errors.New("bad format")
	// ErrVersion: saved data carry a format version this code cannot read.
	ErrVersion = errors.New("unsupported version")
	// ErrChecksum: saved data fail their CRC-32 check.
	ErrChecksum = errors.New("checksum mismatch")
	// ErrUnsupported: an operation is not available for this value, such
	// as freezing a Discriminator that cannot be copied.
	ErrUnsupported = errors.New("unsupported")
	// ErrEmpty: an estimate was asked of no samples.
	ErrEmpty = errors.New("no samples")
)

// DivergedError reports the update at which a discriminator stopped being
// finite. It wraps ErrDiverged. The discriminator's weights are left as they
// were before the failing update when the gradient was the culprit; a
// non-finite loss is reported before any weight is changed.
type DivergedError struct {
	Step int     // 1-based index of the failing update
	Loss float64 // loss of the failing minibatch
}

func (e *DivergedError) Error() string {
	return fmt.Sprintf("skills: update %d diverged (loss %g)", e.Step, e.Loss)
}

// Unwrap returns ErrDiverged.
func (e *DivergedError) Unwrap() error { return ErrDiverged }
