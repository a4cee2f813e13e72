package mdp

import (
	"fmt"
	"math"

	"github.com/successor-go/successor/linalg"
)

// ProbEntry is one entry P(Next | State, Action) = Prob of a finite MDP.
type ProbEntry struct {
	State, Action, Next int
	Prob                float64
}

// Finite is a finite MDP: n states, A actions in every state, sparse
// transition probabilities P(s' | s, a), terminal flags and a start
// distribution. A Finite is immutable after construction and safe for
// concurrent use.
//
// Transitions are stored as one CSR matrix with n*A rows, row s*A + a holding
// P(. | s, a). A terminal state's rows are a self-loop with probability 1;
// oracles and samplers give it zero future (it stops bootstrapping).
type Finite struct {
	n, a     int
	p        *linalg.CSR
	terminal []bool
	start    []float64
}

// MaxRows bounds NumStates*NumActions of a Finite (2^31 - 1 rows, so
// state-action indices fit any int and sizes cannot overflow).
const MaxRows = 1<<31 - 1

// ImpliedRowRatio bounds the rows New makes up itself: a terminal state
// needs no transitions, and New stores a self-loop row for each of its
// actions. Those rows may number at most ImpliedRowRatio times
// (numStates + len(transitions)), so that what New allocates stays
// proportional to what it is given (a one-state MDP with 2^31 - 1 actions
// is refused rather than asking for tens of gigabytes). Every MDP with at
// most ImpliedRowRatio actions is within the bound.
const ImpliedRowRatio = 64

// StochasticTol is the tolerance on row sums used when validating MDPs.
const StochasticTol = 1e-9

// New returns a validated finite MDP with numStates states and numActions
// actions. Transitions may come in any order; duplicates are summed.
// terminal may be nil (no terminal states); otherwise its length is
// numStates. start is a distribution over states (len numStates).
//
// Every (s, a) of a non-terminal state must have outgoing probabilities
// summing to 1 within StochasticTol. A terminal state's actions may be
// omitted (a self-loop is added) or given as a self-loop with probability 1
// (or entries with probability 0); anything else is an error.
//
// Sizes are checked before anything of their size is allocated: at most
// MaxRows state-action pairs, at most ImpliedRowRatio (numStates + len(t))
// pairs of terminal states, and at least one entry of t for every pair of
// a non-terminal state. New's memory is thus O(numStates + len(t)).
//
// Errors wrap ErrDimension (sizes, more than MaxRows state-action pairs,
// or more terminal pairs than ImpliedRowRatio allows), ErrNonFinite, linalg.ErrNotStochastic (a negative
// probability or a row or start distribution not summing to 1; rows give a
// *linalg.RowSumError) or ErrConfig (an index out of range, a terminal
// state with outgoing mass, an all-zero start distribution).
func New(numStates, numActions int, t []ProbEntry, terminal []bool, start []float64) (*Finite, error) {
	if numStates <= 0 || numActions <= 0 {
		return nil, fmt.Errorf("mdp: new: %d states, %d actions: %w", numStates, numActions, ErrDimension)
	}
	if numStates > MaxRows/numActions {
		return nil, fmt.Errorf("mdp: new: %d states x %d actions exceeds %d rows: %w", numStates, numActions, MaxRows, ErrDimension)
	}
	if terminal != nil && len(terminal) != numStates {
		return nil, fmt.Errorf("mdp: new: %d terminal flags for %d states: %w", len(terminal), numStates, ErrDimension)
	}
	if len(start) != numStates {
		return nil, fmt.Errorf("mdp: new: start has length %d, want %d: %w", len(start), numStates, ErrDimension)
	}
	term := make([]bool, numStates)
	copy(term, terminal)
	nt := 0
	for _, f := range term {
		if f {
			nt++
		}
	}
	// Both products fit an int64: numStates*numActions <= MaxRows.
	if need := int64(numStates-nt) * int64(numActions); need > int64(len(t)) {
		return nil, fmt.Errorf("mdp: new: %d transitions cannot give each of the %d state-action pairs of non-terminal states a distribution: %w", len(t), need, linalg.ErrNotStochastic)
	}
	if implied := int64(nt) * int64(numActions); implied > ImpliedRowRatio*(int64(numStates)+int64(len(t))) {
		return nil, fmt.Errorf("mdp: new: %d terminal states x %d actions exceed %d x (%d states + %d transitions) implied self-loops: %w",
			nt, numActions, ImpliedRowRatio, numStates, len(t), ErrDimension)
	}
	var ssum float64
	for s, v := range start {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("mdp: new: start[%d]: %w", s, ErrNonFinite)
		}
		if v < 0 {
			return nil, fmt.Errorf("mdp: new: start[%d] = %v negative: %w", s, v, linalg.ErrNotStochastic)
		}
		ssum += v
	}
	if ssum == 0 {
		return nil, fmt.Errorf("mdp: new: empty start distribution: %w", ErrConfig)
	}
	if math.Abs(ssum-1) > StochasticTol {
		return nil, fmt.Errorf("mdp: new: start sums to %v: %w", ssum, linalg.ErrNotStochastic)
	}
	trip := make([]linalg.Triplet, 0, len(t)+nt*numActions)
	for _, e := range t {
		if e.State < 0 || e.State >= numStates || e.Next < 0 || e.Next >= numStates {
			return nil, fmt.Errorf("mdp: new: transition %d -> %d: state out of range: %w", e.State, e.Next, ErrConfig)
		}
		if e.Action < 0 || e.Action >= numActions {
			return nil, fmt.Errorf("mdp: new: transition from %d: action %d out of range: %w", e.State, e.Action, ErrConfig)
		}
		if math.IsNaN(e.Prob) || math.IsInf(e.Prob, 0) {
			return nil, fmt.Errorf("mdp: new: P(%d|%d,%d): %w", e.Next, e.State, e.Action, ErrNonFinite)
		}
		if e.Prob < 0 {
			return nil, fmt.Errorf("mdp: new: P(%d|%d,%d) = %v negative: %w", e.Next, e.State, e.Action, e.Prob, linalg.ErrNotStochastic)
		}
		if term[e.State] {
			if e.Prob == 0 {
				continue
			}
			if e.Next != e.State || e.Prob != 1 {
				return nil, fmt.Errorf("mdp: new: terminal state %d has outgoing mass to %d: %w", e.State, e.Next, ErrConfig)
			}
			continue // re-added below
		}
		if e.Prob == 0 {
			continue
		}
		trip = append(trip, linalg.Triplet{Row: e.State*numActions + e.Action, Col: e.Next, Val: e.Prob})
	}
	for s := 0; s < numStates; s++ {
		if term[s] {
			for a := 0; a < numActions; a++ {
				trip = append(trip, linalg.Triplet{Row: s*numActions + a, Col: s, Val: 1})
			}
		}
	}
	p, err := linalg.CSRFromTriplets(numStates*numActions, numStates, trip)
	if err != nil {
		return nil, fmt.Errorf("mdp: new: %w", err)
	}
	for r := 0; r < numStates*numActions; r++ {
		_, val := p.Row(r)
		var sum float64
		for _, v := range val {
			sum += v
		}
		if math.Abs(sum-1) > StochasticTol {
			return nil, fmt.Errorf("mdp: new: state %d action %d: %w", r/numActions, r%numActions, &linalg.RowSumError{Row: r, Sum: sum})
		}
	}
	st := make([]float64, numStates)
	copy(st, start)
	return &Finite{n: numStates, a: numActions, p: p, terminal: term, start: st}, nil
}

// NumStates returns the number of states.
func (m *Finite) NumStates() int { return m.n }

// NumActions returns the number of actions (the same in every state).
func (m *Finite) NumActions() int { return m.a }

// Terminal reports whether state s is terminal.
func (m *Finite) Terminal(s int) bool { return m.terminal[s] }

// Start returns the start distribution. The slice must not be modified.
func (m *Finite) Start() []float64 { return m.start }

// Next returns views of the successor states and their probabilities for
// (s, a). They must not be modified.
func (m *Finite) Next(s, a int) (next []int, prob []float64) { return m.p.Row(s*m.a + a) }

// Transitions returns the transition matrix as a CSR with n*A rows (row
// s*A + a is P(. | s, a)) and n columns. It must not be modified.
func (m *Finite) Transitions() *linalg.CSR { return m.p }

// newFromCSR returns a Finite that takes ownership of a CSR p with
// numStates*numActions rows built by this package, checking row sums and
// that terminal rows are self-loops. term and start are used, not copied.
func newFromCSR(numStates, numActions int, p *linalg.CSR, term []bool, start []float64) (*Finite, error) {
	for r := 0; r < numStates*numActions; r++ {
		ind, val := p.Row(r)
		s := r / numActions
		if term[s] && (len(ind) != 1 || ind[0] != s || val[0] != 1) {
			return nil, fmt.Errorf("terminal state %d is not a self-loop: %w", s, ErrConfig)
		}
		var sum float64
		for _, v := range val {
			if v < 0 {
				return nil, &linalg.RowSumError{Row: r, Neg: true}
			}
			sum += v
		}
		if math.Abs(sum-1) > StochasticTol {
			return nil, &linalg.RowSumError{Row: r, Sum: sum}
		}
	}
	var ssum float64
	for _, v := range start {
		ssum += v
	}
	if math.Abs(ssum-1) > StochasticTol {
		return nil, fmt.Errorf("start sums to %v: %w", ssum, linalg.ErrNotStochastic)
	}
	return &Finite{n: numStates, a: numActions, p: p, terminal: term, start: start}, nil
}
