package gpi

import (
	"errors"
	"fmt"

	"github.com/successor-go/successor/internal/errs"
)

// Sentinel errors. Errors returned by this package wrap one of these (or the
// error of an mdp or sf oracle), so callers can branch with errors.Is.
// ErrDimension, ErrNonFinite, ErrDiscount, ErrConfig and ErrDiverged are
// the library's shared sentinels: linalg, mdp, sf and the other packages
// re-export the same values under the same names.
var (
	// ErrDimension: sizes of arguments do not agree.
	ErrDimension = errs.Dimension
	// ErrNonFinite: an input or a computed value is NaN or infinite.
	ErrNonFinite = errs.NonFinite
	// ErrDiscount: a discount factor is outside its allowed range.
	ErrDiscount = errs.Discount
	// ErrConfig: a settings field or a parameter has an invalid value.
	ErrConfig = errs.Config
	// ErrDiverged: a learner produced a non-finite value; the learning
	// loops return errors wrapping it (an *sf.DivergenceError for the SF
	// learners).
	ErrDiverged = errs.Diverged
	// ErrNoSources: GPI needs at least one source.
	ErrNoSources = errors.New("no sources")
	// ErrBound: a value violates a bound of Barreto et al. (2017).
	ErrBound = errors.New("bound violated")
)

// DominanceError reports a state-action pair where the GPI policy's value
// falls below a source policy's value by more than the allowed slack
// (Theorem 1 of Barreto et al. 2017). It wraps ErrBound.
type DominanceError struct {
	State, Action int
	Source        int     // the source policy whose value is not reached
	GPI           float64 // Q^pi(s, a) of the GPI policy
	Value         float64 // Q^{pi_i}(s, a) of the source policy
	Slack         float64 // 2 eps / (1 - gamma) plus the tolerance
}

// Error returns the message, with both values, the slack and the pair.
func (e *DominanceError) Error() string {
	return fmt.Sprintf("gpi: dominance: Q of the gpi policy %.17g < Q of source %d %.17g - slack %.3g at state %d action %d: %v",
		e.GPI, e.Source, e.Value, e.Slack, e.State, e.Action, ErrBound)
}

// Unwrap returns ErrBound.
func (e *DominanceError) Unwrap() error { return ErrBound }

// GapError reports a state-action pair where the optimality gap
// Q*(s, a) - Q^pi(s, a) exceeds a bound (Theorem 2 of Barreto et al. 2017).
// It wraps ErrBound.
type GapError struct {
	State, Action int
	Gap           float64 // Q*(s, a) - Q^pi(s, a)
	Bound         float64 // the bound plus the tolerance
}

// Error returns the message, with the gap, the bound and the pair.
func (e *GapError) Error() string {
	return fmt.Sprintf("gpi: gap: Q* - Q^pi = %.17g exceeds the bound %.17g at state %d action %d: %v",
		e.Gap, e.Bound, e.State, e.Action, ErrBound)
}

// Unwrap returns ErrBound.
func (e *GapError) Unwrap() error { return ErrBound }
