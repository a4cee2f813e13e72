package mdp

import "math/rand/v2"

var _ Env = (*Sampler)(nil)

// Sampler is an Env that samples a Finite: Reset draws the first state
// from the start distribution and Step draws the next state from
// P(. | s, a), each with one rng.Float64 and a cumulative scan of the
// sparse row. Neither allocates.
//
// An episode ends when the next state is terminal (End Terminal) or, for
// maxSteps > 0, when maxSteps steps have been taken without reaching a
// terminal state (End TimeLimit). Reaching a terminal state on the last
// allowed step reports Terminal. A
// Sampler is not safe for concurrent use; give each goroutine its own.
type Sampler struct {
	m        *Finite
	maxSteps int
	state    int
	steps    int
	done     bool
	started  bool
	startIdx []int
	startP   []float64
}

// NewSampler returns a sampler of m with a time limit of maxSteps steps per
// episode; maxSteps <= 0 means no limit.
func NewSampler(m *Finite, maxSteps int) *Sampler {
	s := &Sampler{m: m, maxSteps: maxSteps}
	for i, p := range m.start {
		if p > 0 {
			s.startIdx = append(s.startIdx, i)
			s.startP = append(s.startP, p)
		}
	}
	return s
}

// NumActions returns the number of actions of the MDP.
func (e *Sampler) NumActions() int { return e.m.a }

// NumStates returns the number of states of the MDP, for learners that
// tabulate over the integer states an Env returns.
func (e *Sampler) NumStates() int { return e.m.n }

// MDP returns the sampled MDP.
func (e *Sampler) MDP() *Finite { return e.m }

// Reset starts an episode and returns its first state, drawn from the
// start distribution. If that state is terminal the episode is already
// over: Done reports true and Step panics until the next Reset.
func (e *Sampler) Reset(rng *rand.Rand) int {
	e.state = e.startIdx[SampleIndex(e.startP, rng)]
	e.steps = 0
	e.started = true
	e.done = e.m.terminal[e.state]
	return e.state
}

// Step takes action a in the current state and returns the next state and
// whether the episode goes on (Continuing), reached a terminal state
// (Terminal) or was cut by the time limit (TimeLimit). It panics if a is
// out of range, or if no episode is running (before the first Reset, or
// after the episode ended: call Reset).
func (e *Sampler) Step(a int, rng *rand.Rand) Outcome {
	if !e.started || e.done {
		panic("mdp: sampler: step outside an episode (call Reset)")
	}
	if uint(a) >= uint(e.m.a) {
		panic("mdp: sampler: action out of range")
	}
	ind, val := e.m.p.Row(e.state*e.m.a + a)
	next := ind[SampleIndex(val, rng)]
	e.state = next
	e.steps++
	end := Continuing
	switch {
	case e.m.terminal[next]:
		end = Terminal
	case e.maxSteps > 0 && e.steps >= e.maxSteps:
		end = TimeLimit
	}
	e.done = end != Continuing
	return Outcome{Next: next, End: end}
}

// State returns the current state (the last one returned by Reset or
// Step).
func (e *Sampler) State() int { return e.state }

// Steps returns the number of steps taken in the current episode.
func (e *Sampler) Steps() int { return e.steps }

// Done reports whether the current episode has ended (at a terminal state
// or the time limit); Step panics until the next Reset.
func (e *Sampler) Done() bool { return e.done }
