package gpi

import (
	"github.com/successor-go/successor/internal/vec"

	"fmt"
	"math"

	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
)

// Policy writes the deterministic GPI policy for task w into dst:
// dst[s] is the action Act returns in state s, for s = 0, ..., len(dst)-1.
// If winners is not nil, winners[s] is the source that attained the maximum.
// It returns an error wrapping ErrNonFinite, naming the state, if some
// psi_i(s, a) . w is NaN. It panics under the same conditions as Act, if
// winners is not nil and its length differs from len(dst), or if a source
// does not cover len(dst) states.
func (sel *Selector) Policy(dst mdp.Deterministic, winners []int, w []float64, sources ...Source) error {
	if winners != nil && len(winners) != len(dst) {
		panic(fmt.Sprintf("gpi: policy: %d winners for %d states", len(winners), len(dst)))
	}
	for s := range dst {
		a, i, _ := sel.Act(w, s, sources...)
		if a < 0 {
			return fmt.Errorf("gpi: policy: NaN action value in state %d: %w", s, ErrNonFinite)
		}
		dst[s] = a
		if winners != nil {
			winners[s] = i
		}
	}
	return nil
}

// EvaluateConfig configures Evaluate. A nil *EvaluateConfig and the zero
// value mean the defaults.
type EvaluateConfig struct {
	// Policies, if not nil, holds for every source i the policy pi_i whose
	// successor features the source holds (exactly or approximately). Its
	// exact values are the Evaluation's Sources, which is what Theorem 1 of
	// Barreto et al. (2017) compares the GPI policy with.
	Policies []mdp.Policy
	// Tasks, used when Policies is nil, holds for every source i the task
	// vector w_i it was learned for; source i's own policy is then greedy
	// in psi_i(s, a) . w_i, ties to the lowest action. When both are nil a
	// source's own policy is greedy in psi_i(s, a) . w: the source acting
	// alone on the new task.
	Tasks [][]float64
	// Solver configures the exact evaluations; nil means mdp's defaults.
	Solver *mdp.Solver
}

// Evaluation is the exact evaluation of a GPI policy and of its sources' own
// policies on one task: the exact values of the GPI policy (the embedded
// mdp.Values, as mdp.Evaluate returns them) and what is specific to GPI.
// Value slices are indexed s*A + a (Q) or s (V), as in mdp.Values.
type Evaluation struct {
	// Values holds the exact V and Q of Policy for the task.
	mdp.Values
	// Policy is the deterministic GPI policy, ties broken as in Act.
	Policy mdp.Deterministic
	// Winner[s] is the source that attains the maximum in state s.
	Winner []int
	// SourcePolicies[i] is source i's own policy (see EvaluateConfig).
	SourcePolicies []mdp.Policy
	// Sources[i] holds the exact values of SourcePolicies[i] for the task.
	Sources []*mdp.Values
	// Approx[i][s*A+a] = psi_i(s, a) . w, the source's own estimate of
	// the action values, as GPE computes them.
	Approx [][]float64
}

// Improvement returns, for every state-action pair, how much the GPI policy
// gains over the best source policy: Q[j] - max_i Sources[i].Q[j].
// Theorem 1 of Barreto et al. (2017) says it is >= -2 eps/(1 - gamma) when
// the sources are within eps of their policies' values (Policies given).
func (r *Evaluation) Improvement() []float64 {
	d := make([]float64, len(r.Q))
	for j := range d {
		best := math.Inf(-1)
		for _, v := range r.Sources {
			best = max(best, v.Q[j])
		}
		d[j] = r.Q[j] - best
	}
	return d
}

// Epsilon returns max_i max_{s,a} |Approx[i][s*A+a] - Sources[i].Q[s*A+a]|,
// the measured eps of Theorem 1 of Barreto et al. (2017): how far each
// source's estimate is from the exact value of its own policy. It is only
// that eps when the sources' policies were given in EvaluateConfig.
func (r *Evaluation) Epsilon() float64 {
	var e float64
	for i, v := range r.Sources {
		for j, q := range v.Q {
			e = max(e, math.Abs(r.Approx[i][j]-q))
		}
	}
	return e
}

// Evaluate returns the exact value, on the finite MDP m, of the GPI policy
// over sources for the task w with reward r(s,a,s') = phi(s,a,s') . w and
// discount gamma, together with the exact values of each source's own
// policy (see EvaluateConfig) so that the caller can see where GPI
// improves on which policy.
//
// The GPI policy pi(s) = argmax_a max_i psi_i(s, a) . w is built with Act
// in every state (terminal states included; their values are 0) and
// evaluated with mdp.EvaluateExpected on the expected reward
//
//	rbar(s, a) = sum_{s'} P(s'|s,a) phi(s,a,s') . w,
//
// so the result is the value of the policy in the MDP, not the sources'
// estimate of it. The cost is one policy evaluation per source plus one.
//
// The sources must cover the states of m; an *sf.Table is checked, other
// sources panic as their Psi does. Errors wrap ErrNoSources, ErrDimension
// (shapes of sources, phi, w, m, settings disagree), ErrNonFinite (w or a
// GPE value is not finite) or the error of the mdp oracle (bad discount,
// singular system).
func Evaluate(m *mdp.Finite, sources []Source, phi sf.FeatureMap, w []float64, gamma float64, settings *EvaluateConfig) (*Evaluation, error) {
	if settings == nil {
		settings = &EvaluateConfig{}
	}
	n, na := m.NumStates(), m.NumActions()
	if err := checkSources(sources, na, len(w), n); err != nil {
		return nil, fmt.Errorf("gpi: evaluate: %w", err)
	}
	if phi.Dim() != len(w) {
		return nil, fmt.Errorf("gpi: evaluate: features have dimension %d, task vector %d: %w", phi.Dim(), len(w), ErrDimension)
	}
	if err := checkFinite(w); err != nil {
		return nil, fmt.Errorf("gpi: evaluate: task vector: %w", err)
	}
	if settings.Policies != nil && len(settings.Policies) != len(sources) {
		return nil, fmt.Errorf("gpi: evaluate: %d policies for %d sources: %w", len(settings.Policies), len(sources), ErrDimension)
	}
	if settings.Policies == nil && settings.Tasks != nil {
		if len(settings.Tasks) != len(sources) {
			return nil, fmt.Errorf("gpi: evaluate: %d tasks for %d sources: %w", len(settings.Tasks), len(sources), ErrDimension)
		}
		for i, wi := range settings.Tasks {
			if len(wi) != len(w) {
				return nil, fmt.Errorf("gpi: evaluate: task %d has length %d, want %d: %w", i, len(wi), len(w), ErrDimension)
			}
			if err := checkFinite(wi); err != nil {
				return nil, fmt.Errorf("gpi: evaluate: task %d: %w", i, err)
			}
		}
	}

	rbar := ExpectedReward(m, phi, w)
	var sel Selector
	res := &Evaluation{
		Policy:         make(mdp.Deterministic, n),
		Winner:         make([]int, n),
		SourcePolicies: make([]mdp.Policy, len(sources)),
		Sources:        make([]*mdp.Values, len(sources)),
		Approx:         make([][]float64, len(sources)),
	}
	if err := sel.Policy(res.Policy, res.Winner, w, sources...); err != nil {
		return nil, fmt.Errorf("gpi: evaluate: %w", err)
	}
	v, err := settings.Solver.EvaluateExpected(m, res.Policy, rbar, gamma)
	if err != nil {
		return nil, fmt.Errorf("gpi: evaluate: gpi policy: %w", err)
	}
	res.Values = *v
	for i, src := range sources {
		one := sources[i : i+1]
		q := make([]float64, n*na)
		for s := 0; s < n; s++ {
			sel.Values(q[s*na:(s+1)*na], w, s, one...)
		}
		res.Approx[i] = q
		var pi mdp.Policy
		switch {
		case settings.Policies != nil:
			pi = settings.Policies[i]
		case settings.Tasks != nil:
			d := make(mdp.Deterministic, n)
			if err := sel.Policy(d, nil, settings.Tasks[i], src); err != nil {
				return nil, fmt.Errorf("gpi: evaluate: source %d: %w", i, err)
			}
			pi = d
		default:
			d := make(mdp.Deterministic, n)
			if err := sel.Policy(d, nil, w, src); err != nil {
				return nil, fmt.Errorf("gpi: evaluate: source %d: %w", i, err)
			}
			pi = d
		}
		res.SourcePolicies[i] = pi
		res.Sources[i], err = settings.Solver.EvaluateExpected(m, pi, rbar, gamma)
		if err != nil {
			return nil, fmt.Errorf("gpi: evaluate: source %d: %w", i, err)
		}
	}
	return res, nil
}

// ExpectedReward returns rbar[s*A + a] = sum_{s'} P(s'|s,a) phi(s,a,s') . w
// for every state-action pair of m, 0 for terminal states. It panics if
// phi.Dim() != len(w).
func ExpectedReward(m *mdp.Finite, phi sf.FeatureMap, w []float64) []float64 {
	if phi.Dim() != len(w) {
		panic(fmt.Sprintf("gpi: expected reward: features have dimension %d, task vector %d", phi.Dim(), len(w)))
	}
	n, na := m.NumStates(), m.NumActions()
	rbar := make([]float64, n*na)
	f := make([]float64, len(w))
	for s := 0; s < n; s++ {
		if m.Terminal(s) {
			continue
		}
		for a := 0; a < na; a++ {
			next, prob := m.Next(s, a)
			var r float64
			for j, t := range next {
				phi.Features(f, s, a, t)
				r += prob[j] * vec.Dot(f, w)
			}
			rbar[s*na+a] = r
		}
	}
	return rbar
}

// checkSources checks that sources is not empty and that every source has
// the given number of actions and dimension, and, for an *sf.Table, at
// least the given number of states.
func checkSources(sources []Source, actions, dim, states int) error {
	if len(sources) == 0 {
		return ErrNoSources
	}
	for i, src := range sources {
		a, d := src.Shape()
		if a != actions || d != dim {
			return fmt.Errorf("source %d has shape (%d actions, %d features), want (%d, %d): %w", i, a, d, actions, dim, ErrDimension)
		}
		if t, ok := src.(*sf.Table); ok && t.S < states {
			return fmt.Errorf("source %d has %d states, want %d: %w", i, t.S, states, ErrDimension)
		}
	}
	return nil
}

func checkFinite(x []float64) error {
	for i, v := range x {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("entry %d is %v: %w", i, v, ErrNonFinite)
		}
	}
	return nil
}
