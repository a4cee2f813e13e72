package experiment

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/successor-go/successor/internal/vec"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
	"github.com/successor-go/successor/transfer"
)

// BaselineConfig configures the learners that start from scratch on the
// task, with the same labelled budget as the pretrained agents. A nil
// *BaselineConfig and the zero value mean the documented defaults; Resolve
// fills them in. The
// discount is the task's (Experiment.TaskGamma), an argument of the
// learners.
type BaselineConfig struct {
	// StepSize is the step size, in (0, 1]. 0 means 0.5 (a deterministic
	// floor).
	StepSize float64 `json:"step_size"`
	// Epsilon is the random-action rate of the epsilon-greedy behaviour.
	// 0 means 0.1; a negative value means none, which Resolve records as
	// -1.
	Epsilon float64 `json:"epsilon"`
	// EpisodeSteps is the time limit of an episode. 0 means 1000 (as
	// transfer.AdaptConfig.EpisodeSteps).
	EpisodeSteps int `json:"episode_steps"`
}

// Resolve returns cfg with every default filled in, or an error wrapping
// ErrConfig for an invalid value. Resolving a resolved configuration
// returns it unchanged.
func (cfg BaselineConfig) Resolve() (BaselineConfig, error) {
	c := cfg
	if c.StepSize == 0 {
		c.StepSize = 0.5
	}
	if c.Epsilon == 0 {
		c.Epsilon = 0.1
	}
	if c.Epsilon < 0 {
		c.Epsilon = -1
	}
	if c.EpisodeSteps == 0 {
		c.EpisodeSteps = 1000
	}
	if !(c.StepSize > 0 && c.StepSize <= 1) || !(c.Epsilon == -1 || c.Epsilon >= 0 && c.Epsilon <= 1) || c.EpisodeSteps < 1 {
		return c, fmt.Errorf("experiment: baseline: invalid settings %+v: %w", c, ErrConfig)
	}
	return c, nil
}

// checkGamma returns an error wrapping ErrConfig unless gamma is in
// [0, 1).
func checkGamma(gamma float64) error {
	if !(gamma >= 0 && gamma < 1) {
		return fmt.Errorf("experiment: baseline: discount %v outside [0, 1): %w", gamma, ErrConfig)
	}
	return nil
}

// QBaseline runs tabular Q-learning from scratch (Watkins 1989; Sutton &
// Barto 2nd ed., section 6.5) on env with reward r and discount gamma for
// the largest of the budgets in labelled transitions, acting
// epsilon-greedily on its own Q (ties at random, Q starts at 0), and
// returns the greedy policy after each budget (ascending). Every draw comes
// from rng, which it advances.
func QBaseline(env transfer.Env, r mdp.Reward, gamma float64, budgets []int, cfg *BaselineConfig, rng *rand.Rand) ([]mdp.Deterministic, error) {
	var c BaselineConfig
	if cfg != nil {
		c = *cfg
	}
	c, err := c.Resolve()
	if err != nil {
		return nil, err
	}
	if err := checkGamma(gamma); err != nil {
		return nil, err
	}
	if rng == nil {
		return nil, fmt.Errorf("experiment: baseline: nil rng: %w", ErrConfig)
	}
	n, na := env.NumStates(), env.NumActions()
	q := make([]float64, n*na)
	var out []mdp.Deterministic
	err = runEpisodes(env, budgets, c, rng, func(s int) int {
		return vec.ArgmaxReservoir(q[s*na:(s+1)*na], rng)
	}, func(s, a, next int, term bool) error {
		target := r(s, a, next)
		if !term {
			target += gamma * maxOf(q[next*na:(next+1)*na])
		}
		q[s*na+a] += c.StepSize * (target - q[s*na+a])
		if math.IsNaN(q[s*na+a]) || math.IsInf(q[s*na+a], 0) {
			return fmt.Errorf("experiment: q-learning: %w", ErrDiverged)
		}
		return nil
	}, func() {
		pol := make(mdp.Deterministic, n)
		for s := range pol {
			pol[s] = vec.ArgmaxReservoir(q[s*na:(s+1)*na], nil)
		}
		out = append(out, pol)
	})
	return out, err
}

// SFQBaseline runs SF Q-learning from scratch with the given features phi
// (Barreto et al. 2017, section 5, with a single task), composed of the sf
// package's pieces: the task vector w is re-fitted after every transition
// by recursive least squares (sf.TaskEstimator, ridge lambda 1e-6, the
// exact ridge solution of the rewards seen so far), the agent acts
// epsilon-greedily on psi(s, a) . w (an sf.Table), and psi learns by
// sf.TD with the Greedy target for the current w (phi + gamma psi(s', a*),
// a* greedy in psi(s', .) . w, ties to the lowest action) and the constant
// step cfg.StepSize, discount gamma. It returns the greedy policy after each
// budget (ascending). Every draw comes from rng, which it advances.
func SFQBaseline(env transfer.Env, phi sf.FeatureMap, r mdp.Reward, gamma float64, budgets []int, cfg *BaselineConfig, rng *rand.Rand) ([]mdp.Deterministic, error) {
	var c BaselineConfig
	if cfg != nil {
		c = *cfg
	}
	c, err := c.Resolve()
	if err != nil {
		return nil, err
	}
	if err := checkGamma(gamma); err != nil {
		return nil, err
	}
	if rng == nil {
		return nil, fmt.Errorf("experiment: baseline: nil rng: %w", ErrConfig)
	}
	n, na, d := env.NumStates(), env.NumActions(), phi.Dim()
	tab, err := sf.NewTable(n, na, d)
	if err != nil {
		return nil, fmt.Errorf("experiment: sf q-learning: %w", err)
	}
	w := make([]float64, d)
	td, err := sf.NewTD(tab, phi, gamma, &sf.TDConfig{Target: sf.Greedy, Task: w, Schedule: sf.StepSchedule{StepSize: c.StepSize}})
	if err != nil {
		return nil, fmt.Errorf("experiment: sf q-learning: %w", err)
	}
	est, err := sf.NewTaskEstimator(d, 1e-6, nil)
	if err != nil {
		return nil, fmt.Errorf("experiment: sf q-learning: %w", err)
	}
	f := make([]float64, d)
	q := make([]float64, na)
	qs := func(s int) []float64 {
		for a := range na {
			q[a] = tab.Q(s, a, w)
		}
		return q
	}
	var out []mdp.Deterministic
	err = runEpisodes(env, budgets, c, rng, func(s int) int {
		return vec.ArgmaxReservoir(qs(s), rng)
	}, func(s, a, next int, term bool) error {
		phi.Features(f, s, a, next)
		if err := est.Observe(f, r(s, a, next)); err != nil {
			return fmt.Errorf("experiment: sf q-learning: %w", err)
		}
		if err := est.Task(w); err != nil {
			return fmt.Errorf("experiment: sf q-learning: %w", err)
		}
		if err := td.SetTask(w); err != nil {
			return fmt.Errorf("experiment: sf q-learning: %w", err)
		}
		if err := td.Update(s, a, next, term, -1); err != nil {
			return fmt.Errorf("experiment: sf q-learning: %w: %w", ErrDiverged, err)
		}
		return nil
	}, func() {
		pol := make(mdp.Deterministic, n)
		for s := range pol {
			pol[s] = vec.ArgmaxReservoir(qs(s), nil)
		}
		out = append(out, pol)
	})
	return out, err
}

// runEpisodes drives an online learner for max(budgets) steps, calling snap
// after each budget.
func runEpisodes(env transfer.Env, budgets []int, c BaselineConfig, rng *rand.Rand,
	greedy func(s int) int, learn func(s, a, next int, term bool) error, snap func()) error {
	total := 0
	for i, b := range budgets {
		if b < 0 || i > 0 && b < budgets[i-1] {
			return fmt.Errorf("experiment: budgets must be non-negative and ascending: %w", ErrConfig)
		}
		total = b
	}
	na := env.NumActions()
	bi := 0
	for bi < len(budgets) && budgets[bi] == 0 {
		snap()
		bi++
	}
	steps, empty := 0, 0
	for steps < total {
		s := env.Reset(rng)
		if startDone(env) {
			if empty++; empty >= maxEmpty {
				return fmt.Errorf("experiment: baseline: %d episodes in a row start at a terminal state: %w", empty, ErrConfig)
			}
			continue
		}
		empty = 0
		for t := 0; t < c.EpisodeSteps && steps < total; t++ {
			var a int
			if rng.Float64() < c.Epsilon {
				a = rng.IntN(na)
			} else {
				a = greedy(s)
			}
			out := env.Step(a, rng)
			if err := learn(s, a, out.Next, out.Terminal()); err != nil {
				return err
			}
			steps++
			for bi < len(budgets) && budgets[bi] == steps {
				snap()
				bi++
			}
			if out.Done() {
				break
			}
			s = out.Next
		}
	}
	return nil
}

// maxEmpty is the number of consecutive episodes without a step (a
// terminal start state) after which a learner gives up.
const maxEmpty = 1000

// startDone reports whether env's episode ended at Reset (a terminal start
// state), for environments that can tell (such as *mdp.Sampler).
func startDone(env mdp.Env) bool {
	d, ok := env.(interface{ Done() bool })
	return ok && d.Done()
}

func maxOf(q []float64) float64 {
	m := math.Inf(-1)
	for _, v := range q {
		m = max(m, v)
	}
	return m
}
