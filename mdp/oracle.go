package mdp

import (
	"errors"
	"math/rand/v2"

	"github.com/successor-go/successor/linalg"
)

// CONTRACT STUBS: the mdp issue implements these; signatures are fixed so
// other packages can build against them.

var errTODO = errors.New("mdp: not implemented yet")

// Reward is a reward function r(s, a, s').
type Reward func(s, a, next int) float64

// Values holds exact values of a policy: V[s] and Q[s*A + a].
type Values struct {
	V []float64
	Q []float64
}

// Evaluate returns the exact V^pi and Q^pi of policy pi for reward r and
// discount gamma. Terminal states have value 0 and stop bootstrapping.
// gamma = 1 is allowed when every state reaches a terminal state under pi.
func Evaluate(m *Finite, pi Policy, r Reward, gamma float64) (*Values, error) {
	return nil, errTODO
}

// EvaluateExpected is Evaluate with the expected reward rbar[s*A + a] =
// sum_{s'} P(s'|s,a) r(s,a,s') given directly.
func EvaluateExpected(m *Finite, pi Policy, rbar []float64, gamma float64) (*Values, error) {
	return nil, errTODO
}

// OptimalResult is the exact optimum of an MDP for a reward.
type OptimalResult struct {
	Values                   // Q* and V*
	Policy     Deterministic // a greedy optimal policy (ties to the lowest action)
	Method     string        // how it was computed
	Residual   float64       // achieved max-norm Bellman residual
	Iterations int           // iterations of the method
}

// Optimal returns the exact optimal Q*, V* and a greedy optimal policy.
func Optimal(m *Finite, r Reward, gamma float64) (*OptimalResult, error) {
	return nil, errTODO
}

// Chain returns the state chain P_pi[s][s'] = sum_a pi(a|s) P(s'|s,a), with
// the rows of terminal states zero (no future).
func (m *Finite) Chain(pi Policy) *linalg.CSR { panic(errTODO) }

// StateActionChain returns the chain over state-action pairs
// P_pi[(s,a),(s',a')] = P(s'|s,a) pi(a'|s'), zero into terminal s', indexed
// s*A + a.
func (m *Finite) StateActionChain(pi Policy) *linalg.CSR { panic(errTODO) }

// Env is the step loop of an environment with integer states.
// Termination and truncation are distinct: a terminal next state stops
// bootstrapping; a truncated one (a time limit) does not.
type Env interface {
	NumActions() int
	// Reset starts an episode and returns the first state.
	Reset(rng *rand.Rand) int
	// Step takes action a and returns the next state, whether it is
	// terminal, and whether the episode was truncated by a time limit.
	Step(a int, rng *rand.Rand) (next int, terminal, truncated bool)
}
