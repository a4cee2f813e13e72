package transfer

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/successor-go/successor/mdp"
)

// Score is the normalised score of a policy on a finite MDP: its exact
// value from the start distribution mu, J(pi) = sum_s mu(s) V^pi(s), beside
// the uniform random policy's and the optimal one's, and the normalised
// return
//
//	(J(pi) - J(random)) / (J(optimal) - J(random)),
//
// which is 0 for the uniform random policy and 1 for an optimal policy.
type Score struct {
	Normalised, Value, Random, Optimal float64
}

// Evaluation is the exact evaluation of one policy on one task: its exact
// values (the embedded mdp.Values, as mdp.Evaluate returns them) and its
// normalised Score.
type Evaluation struct {
	mdp.Values
	Score Score
}

// Reference holds the exact values of the uniform random and the optimal
// policy of one task, so that many policies can be scored against them
// without solving for the optimum again.
type Reference struct {
	m               *mdp.Finite
	r               mdp.Reward
	gamma           float64
	Random, Optimal float64
	// Best is an optimal policy.
	Best mdp.Deterministic
}

// NewReference computes the exact values of the uniform random policy and
// of the optimal policy (mdp.Optimal) for reward r and discount gamma. It
// returns an error if the oracle fails or if the task cannot be normalised
// (optimal and random values closer than 1e-12).
func NewReference(m *mdp.Finite, r mdp.Reward, gamma float64) (*Reference, error) {
	opt, err := mdp.Optimal(m, r, gamma)
	if err != nil {
		return nil, fmt.Errorf("transfer: reference: %w", err)
	}
	rnd, err := mdp.Evaluate(m, mdp.Uniform{N: m.NumActions()}, r, gamma)
	if err != nil {
		return nil, fmt.Errorf("transfer: reference: %w", err)
	}
	ref := &Reference{m: m, r: r, gamma: gamma, Random: startValue(m, rnd.V), Optimal: startValue(m, opt.V), Best: opt.Policy}
	if !(ref.Optimal-ref.Random > 1e-12) {
		return nil, fmt.Errorf("transfer: reference: optimal value %v not above random %v: %w", ref.Optimal, ref.Random, ErrConfig)
	}
	return ref, nil
}

// Evaluate returns the exact values of pi (mdp.Evaluate) and its score
// against the reference.
func (ref *Reference) Evaluate(pi mdp.Policy) (*Evaluation, error) {
	v, err := mdp.Evaluate(ref.m, pi, ref.r, ref.gamma)
	if err != nil {
		return nil, fmt.Errorf("transfer: evaluate: %w", err)
	}
	j := startValue(ref.m, v.V)
	return &Evaluation{Values: *v, Score: Score{
		Normalised: (j - ref.Random) / (ref.Optimal - ref.Random),
		Value:      j, Random: ref.Random, Optimal: ref.Optimal,
	}}, nil
}

// Score returns the score of pi against the reference (Evaluate without
// the values).
func (ref *Reference) Score(pi mdp.Policy) (Score, error) {
	ev, err := ref.Evaluate(pi)
	if err != nil {
		return Score{}, err
	}
	return ev.Score, nil
}

// Evaluate returns the exact values of policy pi on the finite MDP m for
// reward r and discount gamma (mdp.Evaluate) and its normalised Score: 0
// is the uniform random policy, 1 an optimal policy, both from m's start
// distribution. Scoring many policies of one task, make a Reference once.
func Evaluate(m *mdp.Finite, pi mdp.Policy, r mdp.Reward, gamma float64) (*Evaluation, error) {
	ref, err := NewReference(m, r, gamma)
	if err != nil {
		return nil, err
	}
	return ref.Evaluate(pi)
}

func startValue(m *mdp.Finite, v []float64) float64 {
	var j float64
	for s, p := range m.Start() {
		j += p * v[s]
	}
	return j
}

// MonteCarlo estimates the discounted return of the policy act on env for
// reward r: the mean over episodes of sum_t gamma^t r(S_t, A_t, S_{t+1})
// (episodes end at a terminal state, a truncation, or after maxSteps steps),
// with its standard error. Use it where no exact oracle exists. env draws
// from rng, which it advances. It returns an error wrapping ErrConfig for
// fewer than 2 episodes, maxSteps < 1, gamma outside [0, 1] or a nil rng,
// and ErrDiverged for a non-finite return.
func MonteCarlo(env mdp.Env, act func(s int) int, r mdp.Reward, gamma float64, episodes, maxSteps int, rng *rand.Rand) (mean, stdErr float64, err error) {
	if episodes < 2 || maxSteps < 1 || !(gamma >= 0 && gamma <= 1) || rng == nil {
		return 0, 0, fmt.Errorf("transfer: monte carlo: %d episodes, %d steps, gamma %v, rng %p: %w", episodes, maxSteps, gamma, rng, ErrConfig)
	}
	var sum, sum2 float64
	for range episodes {
		s := env.Reset(rng)
		var g, disc float64 = 0, 1
		for t := 0; t < maxSteps && !startDone(env); t++ {
			a := act(s)
			out := env.Step(a, rng)
			g += disc * r(s, a, out.Next)
			disc *= gamma
			if out.Done() {
				break
			}
			s = out.Next
		}
		if math.IsNaN(g) || math.IsInf(g, 0) {
			return 0, 0, fmt.Errorf("transfer: monte carlo: non-finite return: %w", ErrDiverged)
		}
		sum += g
		sum2 += g * g
	}
	n := float64(episodes)
	mean = sum / n
	v := (sum2 - n*mean*mean) / (n - 1)
	return mean, math.Sqrt(max(v, 0) / n), nil
}
