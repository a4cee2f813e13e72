package mdp

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/successor-go/successor/internal/vec"
	"github.com/successor-go/successor/linalg"
)

// Policy gives the action probabilities of a (possibly stochastic) policy.
//
// The oracles (Evaluate, Chain, StateActionChain) never query a policy at a
// terminal state, so a policy need not be defined there.
type Policy interface {
	// Probs writes pi(. | s) into dst, whose length is the number of
	// actions. It panics if len(dst) is wrong or s is out of range.
	Probs(dst []float64, s int)
}

// Checker is implemented by values that know the sizes of the MDPs they
// serve: the policies of this package and the feature maps of package sf.
// Check returns an error if the value cannot be used with an MDP of
// numStates states and numActions actions, in the cases where a call of
// its methods would panic: an error wrapping ErrDimension for the wrong
// sizes (or an action index out of range), ErrNonFinite for values that
// make it panic (a NaN action value of Greedy), ErrConfig for a bad
// parameter (an Epsilon outside [0, 1]).
//
// The oracles (Evaluate, PolicyTable, Chain, StateActionChain) and the
// closed forms and learners of package sf call Check when the value has
// it, so that a policy or feature map of the wrong size is an error, not
// a panic. A Policy without Check is trusted to accept every state of the
// MDP and a dst of its number of actions.
type Checker interface {
	Check(numStates, numActions int) error
}

var (
	_ Checker = Deterministic(nil)
	_ Checker = Uniform{}
	_ Checker = (*Table)(nil)
	_ Checker = Greedy{}
	_ Checker = EpsilonGreedy{}
	_ Checker = Softmax{}
)

var (
	_ Policy = Deterministic(nil)
	_ Policy = Uniform{}
	_ Policy = (*Table)(nil)
	_ Policy = Greedy{}
	_ Policy = EpsilonGreedy{}
	_ Policy = Softmax{}
)

// Deterministic is a policy that takes action d[s] in state s.
type Deterministic []int

// Probs writes the one-hot distribution of action d[s] into dst. It panics
// if d[s] is not a valid index into dst.
func (d Deterministic) Probs(dst []float64, s int) {
	clear(dst)
	dst[d[s]] = 1
}

// Check returns an error wrapping ErrDimension unless d has numStates
// entries, each an action in [0, numActions).
func (d Deterministic) Check(numStates, numActions int) error {
	if len(d) != numStates {
		return fmt.Errorf("mdp: deterministic policy: %d actions for %d states: %w", len(d), numStates, ErrDimension)
	}
	for s, a := range d {
		if a < 0 || a >= numActions {
			return fmt.Errorf("mdp: deterministic policy: action %d at state %d outside [0, %d): %w", a, s, numActions, ErrDimension)
		}
	}
	return nil
}

// Uniform is the policy that picks each of N actions with probability 1/N.
type Uniform struct{ N int }

// Probs writes 1/N into every entry of dst. It panics if len(dst) != N.
func (u Uniform) Probs(dst []float64, s int) {
	if len(dst) != u.N {
		panic("mdp: uniform: wrong length")
	}
	for i := range dst {
		dst[i] = 1 / float64(u.N)
	}
}

// Check returns an error wrapping ErrDimension unless u.N equals
// numActions.
func (u Uniform) Check(numStates, numActions int) error {
	if u.N != numActions {
		return fmt.Errorf("mdp: uniform: %d actions, mdp has %d: %w", u.N, numActions, ErrDimension)
	}
	return nil
}

// Table is a stochastic policy given by a table of probabilities,
// pi(a | s) = P[s*A + a]. Build it with NewTable; it is immutable.
type Table struct {
	a int
	p []float64
}

// PolicyTol is the tolerance on the sum of a policy's action probabilities
// used by NewTable and by the oracles when they validate a Policy.
const PolicyTol = 1e-9

// NewTable returns a stochastic table policy over numStates states and
// numActions actions with pi(a | s) = probs[s*numActions + a]. probs is
// copied. Every row must be finite, non-negative and sum to 1 within
// PolicyTol; otherwise the error wraps ErrDimension,
// ErrNonFinite or linalg.ErrNotStochastic.
func NewTable(numStates, numActions int, probs []float64) (*Table, error) {
	// The product is not formed: it may overflow.
	if numStates <= 0 || numActions <= 0 || len(probs)%numActions != 0 || len(probs)/numActions != numStates {
		return nil, fmt.Errorf("mdp: table policy: %d probabilities for %d states x %d actions: %w",
			len(probs), numStates, numActions, ErrDimension)
	}
	for s := 0; s < numStates; s++ {
		if err := checkDist(probs[s*numActions : (s+1)*numActions]); err != nil {
			return nil, fmt.Errorf("mdp: table policy: state %d: %w", s, err)
		}
	}
	p := make([]float64, len(probs))
	copy(p, probs)
	return &Table{a: numActions, p: p}, nil
}

// NumActions returns the number of actions of t.
func (t *Table) NumActions() int { return t.a }

// Probs copies pi(. | s) into dst. It panics if len(dst) differs from the
// number of actions or s is out of range.
func (t *Table) Probs(dst []float64, s int) {
	if len(dst) != t.a {
		panic("mdp: table policy: wrong length")
	}
	copy(dst, t.p[s*t.a:(s+1)*t.a])
}

// Check returns an error wrapping ErrDimension unless t is a table of
// numStates states and numActions actions.
func (t *Table) Check(numStates, numActions int) error {
	if t.a != numActions || len(t.p) != numStates*numActions {
		return fmt.Errorf("mdp: table policy: %d probabilities of %d actions for %d states x %d actions: %w",
			len(t.p), t.a, numStates, numActions, ErrDimension)
	}
	return nil
}

// checkQ returns an error unless q is a table of numStates x numActions
// action values with A == numActions, free of NaN (and of infinities if
// finite is set).
func checkQ(name string, q []float64, a, numStates, numActions int, finite bool) error {
	if a != numActions || len(q) != numStates*numActions {
		return fmt.Errorf("mdp: %s: %d action values of %d actions for %d states x %d actions: %w",
			name, len(q), a, numStates, numActions, ErrDimension)
	}
	for i, v := range q {
		if math.IsNaN(v) || finite && math.IsInf(v, 0) {
			return fmt.Errorf("mdp: %s: Q(%d, %d) = %v: %w", name, i/a, i%a, v, ErrNonFinite)
		}
	}
	return nil
}

// Greedy is the policy greedy in a state-action table Q (indexed s*A + a,
// as Values.Q). Ties are broken toward the lowest action index: the action
// taken is the first a with Q[s*A+a] equal to the row maximum (exact
// comparison).
type Greedy struct {
	Q []float64 // action values, Q[s*A + a]
	A int       // number of actions
}

// Action returns the greedy action in state s (lowest index among ties).
// It panics if A <= 0, s is out of range, or Q(s, .) holds a NaN.
func (g Greedy) Action(s int) int { return argmax(g.Q[s*g.A : (s+1)*g.A]) }

// Probs writes the one-hot distribution of the greedy action into dst.
// It panics as Action does, or if len(dst) != A.
func (g Greedy) Probs(dst []float64, s int) {
	if len(dst) != g.A {
		panic("mdp: greedy: wrong length")
	}
	a := g.Action(s)
	clear(dst)
	dst[a] = 1
}

// Check returns an error wrapping ErrDimension unless g.Q holds
// numStates x numActions values and g.A is numActions, or ErrNonFinite
// if a value is NaN.
func (g Greedy) Check(numStates, numActions int) error {
	return checkQ("greedy", g.Q, g.A, numStates, numActions, false)
}

// EpsilonGreedy takes a uniformly random action with probability Epsilon
// and the greedy action in Q (ties to the lowest index) otherwise:
//
//	pi(a | s) = Epsilon/A + (1 - Epsilon) 1(a = greedy(s))
type EpsilonGreedy struct {
	Q       []float64 // action values, Q[s*A + a]
	A       int       // number of actions
	Epsilon float64   // exploration probability in [0, 1]
}

// Probs writes the epsilon-greedy distribution into dst. It panics if
// len(dst) != A, Epsilon is outside [0, 1], s is out of range or Q(s, .)
// holds a NaN.
func (e EpsilonGreedy) Probs(dst []float64, s int) {
	if len(dst) != e.A {
		panic("mdp: epsilon-greedy: wrong length")
	}
	if !(e.Epsilon >= 0 && e.Epsilon <= 1) {
		panic("mdp: epsilon-greedy: epsilon outside [0, 1]")
	}
	g := argmax(e.Q[s*e.A : (s+1)*e.A])
	u := e.Epsilon / float64(e.A)
	for i := range dst {
		dst[i] = u
	}
	dst[g] += 1 - e.Epsilon
}

// Check returns an error wrapping ErrConfig if Epsilon is outside
// [0, 1], and otherwise errors as Greedy.Check.
func (e EpsilonGreedy) Check(numStates, numActions int) error {
	if !(e.Epsilon >= 0 && e.Epsilon <= 1) {
		return fmt.Errorf("mdp: epsilon-greedy: epsilon %v outside [0, 1]: %w", e.Epsilon, ErrConfig)
	}
	return checkQ("epsilon-greedy", e.Q, e.A, numStates, numActions, false)
}

// Softmax is the Boltzmann policy in Q with a temperature:
//
//	pi(a | s) = exp(Q(s,a)/T) / sum_b exp(Q(s,b)/T)
//
// computed stably (the row maximum is subtracted first).
type Softmax struct {
	Q           []float64 // action values, Q[s*A + a]
	A           int       // number of actions
	Temperature float64   // T > 0; small T approaches greedy
}

// Probs writes the softmax distribution into dst. It panics if
// len(dst) != A, Temperature is not a positive finite number, s is out of
// range or Q(s, .) holds a NaN or an infinity.
func (p Softmax) Probs(dst []float64, s int) {
	if len(dst) != p.A {
		panic("mdp: softmax: wrong length")
	}
	if !(p.Temperature > 0) || math.IsInf(p.Temperature, 1) {
		panic("mdp: softmax: temperature must be positive and finite")
	}
	q := p.Q[s*p.A : (s+1)*p.A]
	mx := q[argmax(q)]
	if math.IsInf(mx, 0) {
		panic("mdp: softmax: infinite action value")
	}
	var z float64
	for i, v := range q {
		e := math.Exp((v - mx) / p.Temperature)
		dst[i] = e
		z += e
	}
	for i := range dst {
		dst[i] /= z
	}
}

// Check returns an error wrapping ErrConfig if the temperature is not
// positive and finite, ErrDimension for a table of the wrong size, or
// ErrNonFinite if an action value is NaN or infinite.
func (p Softmax) Check(numStates, numActions int) error {
	if !(p.Temperature > 0) || math.IsInf(p.Temperature, 1) {
		return fmt.Errorf("mdp: softmax: temperature %v must be positive and finite: %w", p.Temperature, ErrConfig)
	}
	return checkQ("softmax", p.Q, p.A, numStates, numActions, true)
}

// argmax returns the first index of the maximum of q (vec.Argmax). It
// panics on an empty slice or a NaN entry.
func argmax(q []float64) int {
	if len(q) == 0 {
		panic("mdp: no actions")
	}
	for _, v := range q {
		if math.IsNaN(v) {
			panic("mdp: NaN action value")
		}
	}
	return vec.Argmax(q)
}

// SampleIndex draws an index i with probability p[i] using one rng.Float64
// and a cumulative scan. p should sum to 1; if rounding leaves the draw
// beyond the total, the last index with positive probability is returned.
// It panics if p is empty or has no positive entry. It does not allocate.
func SampleIndex(p []float64, rng *rand.Rand) int {
	u := rng.Float64()
	var c float64
	last := -1
	for i, v := range p {
		if v <= 0 {
			continue
		}
		last = i
		c += v
		if u < c {
			return i
		}
	}
	if last < 0 {
		panic("mdp: sample: no positive probability")
	}
	return last
}

// checkDist returns an error unless p is a finite, non-negative vector
// summing to 1 within PolicyTol.
func checkDist(p []float64) error {
	var sum float64
	for i, v := range p {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("entry %d: %w", i, ErrNonFinite)
		}
		if v < 0 {
			return fmt.Errorf("entry %d = %v negative: %w", i, v, linalg.ErrNotStochastic)
		}
		sum += v
	}
	if math.Abs(sum-1) > PolicyTol {
		return fmt.Errorf("probabilities sum to %v: %w", sum, linalg.ErrNotStochastic)
	}
	return nil
}
