package mdp

import (
	"math/rand/v2"
	"strconv"
)

// Env is the step loop of an environment with integer states.
// Termination and truncation are distinct: a terminal next state stops
// bootstrapping; a time limit does not (see End).
type Env interface {
	NumActions() int
	// Reset starts an episode and returns the first state.
	Reset(rng *rand.Rand) int
	// Step takes action a and returns the next state and how the episode
	// stands after the step.
	Step(a int, rng *rand.Rand) Outcome
}

// End says whether and how a step ended its episode.
type End uint8

const (
	// Continuing: the episode goes on from the next state.
	Continuing End = iota
	// Terminal: the next state is terminal. The episode is over and the
	// next state has no future: a TD target does not bootstrap from it.
	Terminal
	// TimeLimit: the episode was cut by a time limit in a non-terminal
	// next state. The episode is over, but the next state still has a
	// future: a TD target bootstraps from it.
	TimeLimit
)

// Done reports whether the episode is over (Terminal or TimeLimit).
func (e End) Done() bool { return e != Continuing }

// Bootstraps reports whether a TD target of the step includes the value of
// the next state: true unless the next state is Terminal.
func (e End) Bootstraps() bool { return e != Terminal }

// String returns "continuing", "terminal" or "time limit".
func (e End) String() string {
	switch e {
	case Continuing:
		return "continuing"
	case Terminal:
		return "terminal"
	case TimeLimit:
		return "time limit"
	}
	return "end(" + strconv.Itoa(int(e)) + ")"
}

// Outcome is the result of one step of an Env: the next state and how the
// episode stands after it.
type Outcome struct {
	Next int
	End  End
}

// Done reports whether the step ended the episode (o.End.Done()).
func (o Outcome) Done() bool { return o.End.Done() }

// Bootstraps reports whether a TD target of the step includes the value of
// the next state (o.End.Bootstraps()).
func (o Outcome) Bootstraps() bool { return o.End.Bootstraps() }

// Terminal reports whether the next state is terminal (o.End == Terminal).
func (o Outcome) Terminal() bool { return o.End == Terminal }
