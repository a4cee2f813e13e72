package usf

import (
	"fmt"

	"github.com/successor-go/successor/internal/errs"
	"github.com/successor-go/successor/internal/vec"
	"github.com/successor-go/successor/sf"
)

// Sentinel errors. All but ErrZeroVector (which is sf's) are the library's
// shared sentinels: linalg, sf and the other packages re-export the same
// values under the same names, so errors.Is works across packages.
var (
	// ErrDimension: sizes of arguments do not agree.
	ErrDimension = errs.Dimension
	// ErrDiscount: a discount factor is outside [0, 1].
	ErrDiscount = errs.Discount
	// ErrNonFinite: an input is NaN or infinite.
	ErrNonFinite = errs.NonFinite
	// ErrDiverged: an update produced a non-finite value (an
	// *sf.DivergenceError).
	ErrDiverged = errs.Diverged
	// ErrConfig: a configuration field has an invalid value, or a required
	// rng is nil.
	ErrConfig = errs.Config
	// ErrCorrupt: saved bytes are truncated, altered, of another format or
	// version, or out of range.
	ErrCorrupt = errs.Corrupt
	// ErrZeroVector: a vector of zero length has no direction.
	ErrZeroVector = sf.ErrZeroVector
)

// Approximator is a universal successor feature approximator psi(s, a, z)
// for observations x(s) in R^obs, A actions and features in R^d (z in R^d).
type Approximator interface {
	// ObsDim returns the observation dimension.
	ObsDim() int
	// Shape returns the number of actions and the feature dimension d:
	// psi(x, ., z) is an actions x d matrix, as for gpi sources and
	// sf.Table.
	Shape() (actions, dim int)
	// Psi writes psi(s, a, z) for every action into dst, action-major:
	// dst[a*d + k]. x is the observation of s (len obs), z has len d. It
	// panics if a length is wrong.
	Psi(dst, x, z []float64)
	// Update makes one semi-gradient TD(0) update on the transitions of b
	// and returns the loss (1/(2n)) sum_i ||delta_i||^2 before the update.
	// It returns a *sf.DivergenceError (wrapping ErrDiverged) if a
	// non-finite value appears; the approximator is then unusable. It
	// panics if b is malformed for this approximator.
	Update(b *Batch) (loss float64, err error)
}

// StatePsi is implemented by approximators with a fast path for one-hot
// observations x(s) = e_s: PsiState(dst, s, z) equals Psi(dst, e_s, z).
type StatePsi interface {
	PsiState(dst []float64, s int, z []float64)
}

// Pin the implementations.
var (
	_ Approximator = (*Tabular)(nil)
	_ Approximator = (*Neural)(nil)
	_ StatePsi     = (*Tabular)(nil)
)

// Batch is a minibatch of n = len(A) transitions (s, a, phi, s', terminal,
// z), row-major. Observations come either as vectors X and NextX (n rows of
// obs values) or, for one-hot observations x(s) = e_s, as the states S and
// Next with X and NextX nil. Tabular reads S and Next when they are set and
// X and NextX otherwise; Neural reads X and NextX when they are
// set and S and Next otherwise.
//
// K optionally gives, instead of the vectors z, their indices into the
// finite set of a Tabular (z_i = Tabular.Z[K[i]]): Tabular reads K when it
// is not nil (Z is then not read and may be nil) and Z otherwise, so a
// caller that knows the index skips the look-up. Neural ignores K and
// always reads Z. NewBatch leaves K nil.
type Batch struct {
	S, Next  []int     // states of s and s' (one-hot observations), or nil
	X, NextX []float64 // observations of s and s', n*obs, or nil
	A        []int     // actions, len n
	// NextA, if not nil, holds for each transition the next action to
	// bootstrap from; a negative entry (or a nil NextA) means the greedy
	// action of the policy of z.
	NextA    []int
	Phi      []float64 // features phi(s, a, s'), n*d
	Z        []float64 // task or skill vectors, n*d
	Terminal []bool    // s' is terminal: no bootstrap (truncation is not)
	K        []int     // indices of z in a Tabular's set, or nil
}

// NewBatch returns a batch of n transitions with every slice allocated:
// S, Next and NextA (filled with -1) always, X and NextX only if obs > 0.
func NewBatch(n, obs, dim int) *Batch {
	b := &Batch{
		S:        make([]int, n),
		Next:     make([]int, n),
		A:        make([]int, n),
		NextA:    make([]int, n),
		Phi:      make([]float64, n*dim),
		Z:        make([]float64, n*dim),
		Terminal: make([]bool, n),
	}
	for i := range b.NextA {
		b.NextA[i] = -1
	}
	if obs > 0 {
		b.X = make([]float64, n*obs)
		b.NextX = make([]float64, n*obs)
	}
	return b
}

// Len returns the number of transitions, len(b.A).
func (b *Batch) Len() int { return len(b.A) }

// check panics unless b is well formed for obs, dim. With byIndex (a
// Tabular given K) Z may be nil.
func (b *Batch) check(name string, obs, actions, dim int, byIndex bool) {
	n := len(b.A)
	bad := func(what string, got, want int) {
		panic(fmt.Sprintf("usf: %s: batch %s has length %d, want %d", name, what, got, want))
	}
	if len(b.Phi) != n*dim {
		bad("Phi", len(b.Phi), n*dim)
	}
	if len(b.Z) != n*dim && !(byIndex && b.Z == nil) {
		bad("Z", len(b.Z), n*dim)
	}
	if byIndex && len(b.K) != n {
		bad("K", len(b.K), n)
	}
	if len(b.Terminal) != n {
		bad("Terminal", len(b.Terminal), n)
	}
	if b.NextA != nil && len(b.NextA) != n {
		bad("NextA", len(b.NextA), n)
	}
	if b.X != nil || b.NextX != nil {
		if len(b.X) != n*obs {
			bad("X", len(b.X), n*obs)
		}
		if len(b.NextX) != n*obs {
			bad("NextX", len(b.NextX), n*obs)
		}
	} else {
		if len(b.S) != n {
			bad("S", len(b.S), n)
		}
		if len(b.Next) != n {
			bad("Next", len(b.Next), n)
		}
	}
	for _, a := range b.A {
		if uint(a) >= uint(actions) {
			panic(fmt.Sprintf("usf: %s: action %d out of range [0, %d)", name, a, actions))
		}
	}
	for _, a := range b.NextA {
		if a >= actions {
			panic(fmt.Sprintf("usf: %s: next action %d out of range [0, %d)", name, a, actions))
		}
	}
}

// nextAction returns b.NextA[i], or -1 for the greedy action.
func (b *Batch) nextAction(i int) int {
	if b.NextA == nil {
		return -1
	}
	return b.NextA[i]
}

// Observer gives the observation x(s) of an integer state.
type Observer interface {
	// Dim returns the observation dimension.
	Dim() int
	// Observe writes x(s) into dst (len Dim). It panics if len(dst) is
	// wrong or s is out of range.
	Observe(dst []float64, s int)
}

// OneHot is the observation x(s) = e_s over N states.
type OneHot struct{ N int }

// Dim returns N.
func (o OneHot) Dim() int { return o.N }

// Observe writes e_s into dst.
func (o OneHot) Observe(dst []float64, s int) {
	if len(dst) != o.N {
		panic(fmt.Sprintf("usf: one-hot: observation slice has length %d, want %d", len(dst), o.N))
	}
	clear(dst)
	dst[s] = 1
}

// ObserverFunc adapts a function to an Observer of dimension D.
type ObserverFunc struct {
	D int
	F func(dst []float64, s int)
}

// Dim returns D.
func (o ObserverFunc) Dim() int { return o.D }

// Observe calls F.
func (o ObserverFunc) Observe(dst []float64, s int) {
	if len(dst) != o.D {
		panic(fmt.Sprintf("usf: observer: observation slice has length %d, want %d", len(dst), o.D))
	}
	o.F(dst, s)
}

// greedy returns argmax_a psi[a*d:(a+1)*d] . z, ties to the lowest action.
func greedy(psi, z []float64, actions int) int {
	d := len(z)
	best, bq := 0, vec.Dot(psi[:d], z)
	for a := 1; a < actions; a++ {
		if q := vec.Dot(psi[a*d:(a+1)*d], z); q > bq {
			best, bq = a, q
		}
	}
	return best
}

// hotIndex returns the index of the single 1 of a one-hot x. It panics if
// x is not one-hot (exactly one entry 1, the rest 0).
func hotIndex(name string, x []float64) int {
	h := -1
	for i, v := range x {
		switch {
		case v == 0:
		case v == 1 && h < 0:
			h = i
		default:
			panic(fmt.Sprintf("usf: %s: observation is not one-hot (entry %d = %v)", name, i, v))
		}
	}
	if h < 0 {
		panic(fmt.Sprintf("usf: %s: observation is all zero, not one-hot", name))
	}
	return h
}

func checkLen(name, what string, v []float64, n int) {
	if len(v) != n {
		panic(fmt.Sprintf("usf: %s: %s has length %d, want %d", name, what, len(v), n))
	}
}

func checkGamma(name string, gamma float64) error {
	if !(gamma >= 0 && gamma <= 1) {
		return fmt.Errorf("usf: %s: gamma %v outside [0, 1]: %w", name, gamma, ErrDiscount)
	}
	return nil
}
