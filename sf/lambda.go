package sf

import (
	"fmt"
	"math"
)

// Trace selects how the eligibility trace of a pair grows when it is
// visited.
type Trace int

const (
	// Accumulating traces add one per visit: e(s,a) <- e(s,a) + 1.
	Accumulating Trace = iota
	// Replacing traces reset to one: e(s,a) <- 1 (Singh and Sutton 1996).
	Replacing
)

// String returns the name of the trace kind.
func (t Trace) String() string {
	switch t {
	case Accumulating:
		return "accumulating"
	case Replacing:
		return "replacing"
	}
	return fmt.Sprintf("Trace(%d)", int(t))
}

// TDLambdaConfig configures a TDLambda learner. A nil *TDLambdaConfig means
// the zero value: lambda 0, accumulating traces, constant step 0.1.
type TDLambdaConfig struct {
	// Lambda is the trace decay, in [0, 1]. 0 gives TD(0).
	Lambda float64
	// Trace is the kind of trace.
	Trace Trace
	// Schedule is the step-size schedule; n counts all updates of the learner
	// (one step size is shared by every pair the traces reach).
	Schedule StepSchedule
	// Cutoff drops a trace once it falls below this value, bounding the
	// work per update. 0 means 1e-4; use a negative value to keep every
	// non-zero trace (exact, but the work grows with the episode).
	Cutoff float64
}

// TDLambda is tabular on-policy TD(lambda) for successor features with
// eligibility traces over state-action pairs (the SF form of Sarsa(lambda),
// Sutton & Barto 2nd ed., Section 12.7). For each transition,
//
//	delta   = phi(s,a,s') + gamma (1 - terminal(s')) psi(s',a') - psi(s,a)   (a vector in R^d)
//	e(s,a) <- e(s,a) + 1   (accumulating)  or  1   (replacing)
//	psi(x) <- psi(x) + alpha e(x) delta,   e(x) <- gamma lambda e(x)   for every pair x,
//
// where a' is the next action taken (the Sampled target). The convention:
// one scalar trace per state-action pair, shared by all d features (the
// update is linear in phi, so this is TD(lambda) run on every feature at
// once). A terminal next state clears all traces after its update; at a
// truncation the update bootstraps as usual and the caller ends the episode
// with EndEpisode, which also clears the traces.
//
// With lambda = 0 it is TD(0) with the Sampled target. Only pairs with a
// trace above the cutoff are touched, so an update costs O(k d) for k
// live traces. A TDLambda is not safe for concurrent use.
type TDLambda struct {
	Table *Table

	phi    FeatureMap
	gamma  float64
	decay  float64 // gamma * lambda
	trace  Trace
	cutoff float64
	sched  schedule

	e     []float64 // trace per pair
	live  []int     // pairs with a non-zero trace
	delta []float64 // TD error (d)
	buf   []float64 // phi (d)
	steps int
	err   error
}

// NewTDLambda returns a TD(lambda) learner updating t in place for the
// features phi and discount gamma in [0, 1]. Errors wrap ErrDiscount,
// ErrDimension (as for NewTD) or ErrConfig (a nil table or feature map,
// lambda outside [0, 1], an unknown trace, a bad step).
func NewTDLambda(t *Table, phi FeatureMap, gamma float64, s *TDLambdaConfig) (*TDLambda, error) {
	if s == nil {
		s = &TDLambdaConfig{}
	}
	if t == nil || phi == nil {
		return nil, fmt.Errorf("sf: td lambda: nil table or feature map: %w", ErrConfig)
	}
	if !(gamma >= 0 && gamma <= 1) {
		return nil, fmt.Errorf("sf: td lambda: gamma %v outside [0, 1]: %w", gamma, ErrDiscount)
	}
	if !(s.Lambda >= 0 && s.Lambda <= 1) {
		return nil, fmt.Errorf("sf: td lambda: lambda %v outside [0, 1]: %w", s.Lambda, ErrConfig)
	}
	if s.Trace != Accumulating && s.Trace != Replacing {
		return nil, fmt.Errorf("sf: td lambda: unknown trace %d: %w", int(s.Trace), ErrConfig)
	}
	if err := checkTable("td lambda", t); err != nil {
		return nil, err
	}
	if phi.Dim() != t.D {
		return nil, fmt.Errorf("sf: td lambda: features of dimension %d for a table of %d: %w", phi.Dim(), t.D, ErrDimension)
	}
	if err := checkFeatures(phi, t.S, t.A); err != nil {
		return nil, fmt.Errorf("sf: td lambda: %w", err)
	}
	st, err := s.Schedule.resolve()
	if err != nil {
		return nil, fmt.Errorf("sf: td lambda: %w", err)
	}
	cut := s.Cutoff
	if cut == 0 {
		cut = 1e-4
	}
	if math.IsNaN(cut) {
		return nil, fmt.Errorf("sf: td lambda: cutoff NaN: %w", ErrConfig)
	}
	return &TDLambda{
		Table:  t,
		phi:    phi,
		gamma:  gamma,
		decay:  gamma * s.Lambda,
		trace:  s.Trace,
		cutoff: cut,
		sched:  newSchedule(st, 1),
		e:      make([]float64, t.S*t.A),
		live:   make([]int, 0, t.S*t.A),
		delta:  make([]float64, t.D),
		buf:    make([]float64, t.D),
	}, nil
}

// Steps returns the number of updates made.
func (l *TDLambda) Steps() int { return l.steps }

// Err returns the *DivergenceError of the first update with a non-finite
// TD error, or nil.
func (l *TDLambda) Err() error { return l.err }

// Live returns the number of pairs with a live trace.
func (l *TDLambda) Live() int { return len(l.live) }

// EndEpisode clears all traces. Call it when an episode is truncated (a
// terminal next state clears them by itself).
func (l *TDLambda) EndEpisode() {
	for _, i := range l.live {
		l.e[i] = 0
	}
	l.live = l.live[:0]
}

// Update makes one TD(lambda) update for the transition (s, a) -> next with
// the next action nextAction (not read when terminal). It returns nil, or
// a *DivergenceError once a TD error is non-finite; after that, updates do
// nothing. It panics if an index is out of range. It does not allocate.
func (l *TDLambda) Update(s, a, next int, terminal bool, nextAction int) error {
	if l.err != nil {
		return l.err
	}
	t := l.Table
	d, na := t.D, t.A
	if uint(s) >= uint(t.S) || uint(a) >= uint(na) || uint(next) >= uint(t.S) || (!terminal && uint(nextAction) >= uint(na)) {
		panic(fmt.Sprintf("sf: td lambda: transition (%d, %d) -> (%d, %d) out of range", s, a, next, nextAction))
	}
	l.phi.Features(l.buf, s, a, next)
	pair := s*na + a
	cur := t.Data[pair*d : (pair+1)*d]
	var nxt []float64
	if !terminal {
		q := (next*na + nextAction) * d
		nxt = t.Data[q : q+d]
	}
	check := kernelDelta(l.delta, l.buf, nxt, cur, l.gamma)
	l.steps++
	if math.IsNaN(check) || math.IsInf(check, 0) {
		l.err = &DivergenceError{Learner: "td lambda", Step: l.steps, State: s, Action: a}
		return l.err
	}
	if l.e[pair] == 0 {
		l.live = append(l.live, pair)
	}
	if l.trace == Replacing {
		l.e[pair] = 1
	} else {
		l.e[pair]++
	}
	alpha := l.sched.step(0)
	for j := 0; j < len(l.live); {
		i := l.live[j]
		axpy(t.Data[i*d:(i+1)*d], l.delta, alpha*l.e[i])
		if e := l.e[i] * l.decay; e > 0 && e > l.cutoff {
			l.e[i] = e
			j++
		} else {
			l.e[i] = 0
			l.live[j] = l.live[len(l.live)-1]
			l.live = l.live[:len(l.live)-1]
		}
	}
	if terminal {
		l.EndEpisode()
	}
	return nil
}
