package gpi

import (
	"github.com/successor-go/successor/internal/vec"

	"fmt"
	"math"
	"math/rand/v2"

	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
)

// Defaults of LearnConfig.
const (
	DefaultLearnGamma   = 0.95
	DefaultStepsPerTask = 10000
	DefaultEpsilon      = 0.1
	DefaultStepSize     = 0.1
)

// LearnConfig configures SFQLearning and QLearning. A nil *LearnConfig
// and the zero value mean the defaults.
type LearnConfig struct {
	// Gamma is the discount, in (0, 1). 0 means DefaultLearnGamma.
	Gamma float64
	// StepsPerTask is K, the number of transitions before the next task
	// of the sequence starts. 0 means DefaultStepsPerTask.
	StepsPerTask int
	// Epsilon is the probability of a uniformly random action, in
	// [0, 1]. 0 means DefaultEpsilon; a negative value means none.
	Epsilon float64
	// StepSize is the constant step size of the TD and Q-learning updates,
	// in (0, 1]. 0 means DefaultStepSize.
	StepSize float64
	// TimeLimit is the number of steps after which an episode is
	// truncated (it bootstraps; it is not a termination). 0 means
	// mdp.DepotTimeLimit; a negative value means no limit.
	TimeLimit int
	// EvalEvery is the number of transitions between exact evaluations of
	// the greedy policy. 0 means StepsPerTask/10 (at least 1).
	EvalEvery int
	// CurrentOnly makes SFQLearning update only the current task's table.
	// By default the table of the source that GPI followed is updated too,
	// toward its own task, as in the SF Q-learning algorithm of Barreto
	// et al. (2017).
	CurrentOnly bool
}

type learnParams struct {
	gamma, eps, alpha           float64
	steps, timeLimit, evalEvery int
	currentOnly                 bool
}

func (s *LearnConfig) resolve() (learnParams, error) {
	var z LearnConfig
	if s != nil {
		z = *s
	}
	c := learnParams{gamma: z.Gamma, eps: z.Epsilon, alpha: z.StepSize, steps: z.StepsPerTask,
		timeLimit: z.TimeLimit, evalEvery: z.EvalEvery, currentOnly: z.CurrentOnly}
	if c.gamma == 0 {
		c.gamma = DefaultLearnGamma
	}
	if !(c.gamma > 0 && c.gamma < 1) {
		return c, fmt.Errorf("gamma %v outside (0, 1): %w", c.gamma, ErrDiscount)
	}
	if c.steps == 0 {
		c.steps = DefaultStepsPerTask
	}
	if c.steps < 0 {
		return c, fmt.Errorf("steps per task %d: %w", c.steps, ErrConfig)
	}
	switch {
	case c.eps == 0:
		c.eps = DefaultEpsilon
	case c.eps < 0:
		c.eps = 0
	case !(c.eps <= 1):
		return c, fmt.Errorf("epsilon %v above 1: %w", c.eps, ErrConfig)
	}
	if c.alpha == 0 {
		c.alpha = DefaultStepSize
	}
	if !(c.alpha > 0 && c.alpha <= 1) {
		return c, fmt.Errorf("alpha %v outside (0, 1]: %w", c.alpha, ErrConfig)
	}
	switch {
	case c.timeLimit == 0:
		c.timeLimit = mdp.DepotTimeLimit
	case c.timeLimit < 0:
		c.timeLimit = 0
	}
	if c.evalEvery == 0 {
		c.evalEvery = max(1, c.steps/10)
	}
	if c.evalEvery < 0 {
		return c, fmt.Errorf("eval every %d: %w", c.evalEvery, ErrConfig)
	}
	return c, nil
}

// Progress is one exact evaluation during a learning run.
type Progress struct {
	Task  int // index of the current task in the sequence
	Step  int // transitions made on this task so far
	Total int // transitions made in the run so far
	// Return is the exact normalised return of the agent's greedy policy
	// (no exploration) on the current task from the start distribution:
	// 0 is the uniform random policy, 1 is optimal (mdp.OptimalExpected).
	Return float64
}

// LearnResult is the outcome of a learning run over a task sequence.
type LearnResult struct {
	// Curve holds every evaluation in order: on each task at step 0
	// (before learning on it: zero-shot transfer), every EvalEvery
	// transitions, and at the end of the task.
	Curve []Progress
	// Final[i] is the normalised return at the end of task i.
	Final []float64
	// Mean is the mean Return over Curve: the normalised area under the
	// learning curve, averaged over tasks.
	Mean float64
	// Tables holds, for SFQLearning, the SF table of each task in order.
	Tables []*sf.Table
	// Q holds, for QLearning, the final action values, Q[s*A + a].
	Q []float64
}

// agent is what the learning loop drives.
type agent interface {
	// begin starts task i with vector w.
	begin(i int, w []float64) error
	// act returns a greedy action in s for the current task, ties broken
	// uniformly at random with rng.
	act(s int, rng *rand.Rand) (int, error)
	// update learns from the transition (s, a, next).
	update(s, a, next int, terminal bool) error
	// policy writes the greedy policy of the current task into dst.
	policy(dst mdp.Deterministic) error
}

// SFQLearning runs SF Q-learning over a sequence of tasks, in the style of
// Barreto et al. (2017, "Successor Features for Transfer in Reinforcement
// Learning", NeurIPS, section 5): the agent faces tasks[0], tasks[1], ...
// in turn, StepsPerTask transitions each, with reward
// r(s,a,s') = phi(s,a,s') . w_i. It keeps one SF table per task seen (a new
// zero table when a task starts) and
//
//   - acts by GPI over all tables for the current task vector w_i, with
//     an epsilon-greedy choice; while learning, ties between greedy
//     actions are broken uniformly at random (common practice: a new
//     table is all zeros, and the lowest-action rule would send the agent
//     one way only), while the evaluated policy breaks them as Act does;
//   - updates the current table with sf's TD learner, greedy target for
//     w_i: psi_i(s,a) <- psi_i(s,a) + alpha (phi(s,a,s') + gamma psi_i(s',a') - psi_i(s,a)),
//     a' = argmax_b psi_i(s',b) . w_i;
//   - unless CurrentOnly, also updates the table c that GPI followed,
//     when c is an earlier task's, with its own greedy target for w_c.
//
// The agent is told each task vector; it does not infer it (see sf for
// task inference). Episodes start from m's start distribution, end at a
// terminal state or are truncated after TimeLimit steps, and restart at
// each new task.
//
// After every EvalEvery transitions (and at the start and end of each
// task) the GPI policy for w_i without exploration is evaluated exactly
// with mdp.EvaluateExpected and normalised, 0 = uniform random policy, 1 =
// optimal; progress, if not nil, is called with each evaluation. The run
// is deterministic given the rng state.
//
// Errors wrap ErrConfig (bad settings, a nil rng, or a task whose optimal
// and uniform returns coincide, so that the normalised return is
// undefined), ErrNoSources (no tasks), ErrDimension, ErrNonFinite,
// ErrDiverged (with the step, from sf.DivergenceError) or an oracle error.
func SFQLearning(m *mdp.Finite, phi sf.FeatureMap, tasks [][]float64, settings *LearnConfig, progress func(Progress), rng *rand.Rand) (*LearnResult, error) {
	c, err := settings.resolve()
	if err != nil {
		return nil, fmt.Errorf("gpi: sf q-learning: %w", err)
	}
	ag := &sfqAgent{m: m, phi: phi, cfg: c}
	res, err := learn(m, phi, tasks, c, ag, progress, rng)
	if err != nil {
		return nil, fmt.Errorf("gpi: sf q-learning: %w", err)
	}
	res.Tables = ag.tables
	return res, nil
}

// QLearning runs tabular Q-learning (Watkins 1989; Sutton and Barto, 2nd
// ed., section 6.5) over the same task sequence, with the same
// exploration, step size, episodes and exact evaluation as SFQLearning:
// the baseline without transfer machinery (ties between greedy actions
// broken at random while learning, to the lowest action when evaluated).
// One Q table is kept across
// tasks (a new task starts from the previous task's values), and the
// reward phi(s,a,s') . w_i is computed from the features. Errors are as
// for SFQLearning.
func QLearning(m *mdp.Finite, phi sf.FeatureMap, tasks [][]float64, settings *LearnConfig, progress func(Progress), rng *rand.Rand) (*LearnResult, error) {
	c, err := settings.resolve()
	if err != nil {
		return nil, fmt.Errorf("gpi: q-learning: %w", err)
	}
	ag := &qAgent{m: m, phi: phi, cfg: c, q: make([]float64, m.NumStates()*m.NumActions()), f: make([]float64, phi.Dim())}
	res, err := learn(m, phi, tasks, c, ag, progress, rng)
	if err != nil {
		return nil, fmt.Errorf("gpi: q-learning: %w", err)
	}
	res.Q = ag.q
	return res, nil
}

// learn is the loop shared by the learners.
func learn(m *mdp.Finite, phi sf.FeatureMap, tasks [][]float64, c learnParams, ag agent, progress func(Progress), rng *rand.Rand) (*LearnResult, error) {
	if rng == nil {
		return nil, fmt.Errorf("nil rng: %w", ErrConfig)
	}
	if len(tasks) == 0 {
		return nil, fmt.Errorf("no tasks: %w", ErrNoSources)
	}
	for i, w := range tasks {
		if len(w) != phi.Dim() {
			return nil, fmt.Errorf("task %d has length %d, features %d: %w", i, len(w), phi.Dim(), ErrDimension)
		}
		if err := checkFinite(w); err != nil {
			return nil, fmt.Errorf("task %d: %w", i, err)
		}
	}
	n, na := m.NumStates(), m.NumActions()
	env := mdp.NewSampler(m, c.timeLimit)
	pol := make(mdp.Deterministic, n)
	res := &LearnResult{Final: make([]float64, len(tasks))}
	total := 0
	for i, w := range tasks {
		rbar := ExpectedReward(m, phi, w)
		opt, err := mdp.OptimalExpected(m, rbar, c.gamma)
		if err != nil {
			return nil, fmt.Errorf("task %d: optimal: %w", i, err)
		}
		uni, err := mdp.EvaluateExpected(m, mdp.Uniform{N: na}, rbar, c.gamma)
		if err != nil {
			return nil, fmt.Errorf("task %d: uniform policy: %w", i, err)
		}
		jOpt, jUni := startValue(m, opt.V), startValue(m, uni.V)
		if !(jOpt-jUni > 1e-12*(1+math.Abs(jOpt))) {
			return nil, fmt.Errorf("task %d: optimal return %v equals the uniform policy's %v, normalised return undefined: %w", i, jOpt, jUni, ErrConfig)
		}
		if err := ag.begin(i, w); err != nil {
			return nil, fmt.Errorf("task %d: %w", i, err)
		}
		evaluate := func(step int) error {
			if err := ag.policy(pol); err != nil {
				return err
			}
			v, err := mdp.EvaluateExpected(m, pol, rbar, c.gamma)
			if err != nil {
				return fmt.Errorf("task %d: evaluate: %w", i, err)
			}
			p := Progress{Task: i, Step: step, Total: total, Return: (startValue(m, v.V) - jUni) / (jOpt - jUni)}
			res.Curve = append(res.Curve, p)
			res.Final[i] = p.Return
			if progress != nil {
				progress(p)
			}
			return nil
		}
		if err := evaluate(0); err != nil {
			return nil, err
		}
		s := env.Reset(rng)
		for step := 1; step <= c.steps; step++ {
			a, err := ag.act(s, rng)
			if err != nil {
				return nil, fmt.Errorf("task %d step %d: %w", i, step, err)
			}
			if c.eps > 0 && rng.Float64() < c.eps {
				a = rng.IntN(na)
			}
			out := env.Step(a, rng)
			if err := ag.update(s, a, out.Next, out.Terminal()); err != nil {
				return nil, fmt.Errorf("task %d step %d: %w", i, step, err)
			}
			total++
			if out.Done() {
				s = env.Reset(rng)
			} else {
				s = out.Next
			}
			if step%c.evalEvery == 0 || step == c.steps {
				if err := evaluate(step); err != nil {
					return nil, err
				}
			}
		}
	}
	for _, p := range res.Curve {
		res.Mean += p.Return
	}
	res.Mean /= float64(len(res.Curve))
	return res, nil
}

// startValue returns sum_s start(s) V(s).
func startValue(m *mdp.Finite, v []float64) float64 {
	var j float64
	for s, p := range m.Start() {
		j += p * v[s]
	}
	return j
}

// sfqAgent is SF Q-learning with GPI over one table per task.
type sfqAgent struct {
	m      *mdp.Finite
	phi    sf.FeatureMap
	cfg    learnParams
	tables []*sf.Table
	tds    []*sf.TD
	srcs   []Source
	w      []float64
	cur    int
	winner int
	sel    Selector
	q      []float64 // GPE values of all sources in one state
	best   []float64 // max over sources per action
	from   []int     // source attaining best
}

func (g *sfqAgent) begin(i int, w []float64) error {
	t, err := sf.NewTable(g.m.NumStates(), g.m.NumActions(), g.phi.Dim())
	if err != nil {
		return err
	}
	td, err := sf.NewTD(t, g.phi, g.cfg.gamma, &sf.TDConfig{Target: sf.Greedy, Task: w, Schedule: sf.StepSchedule{StepSize: g.cfg.alpha}})
	if err != nil {
		return err
	}
	g.tables = append(g.tables, t)
	g.tds = append(g.tds, td)
	g.srcs = append(g.srcs, t)
	g.w = w
	g.cur = i
	return nil
}

func (g *sfqAgent) act(s int, rng *rand.Rand) (int, error) {
	na := g.m.NumActions()
	k := len(g.srcs)
	if cap(g.q) < k*na {
		g.q = make([]float64, k*na)
		g.best = make([]float64, na)
		g.from = make([]int, na)
	}
	q := g.sel.Values(g.q[:k*na], g.w, s, g.srcs...)
	for a := 0; a < na; a++ {
		g.best[a], g.from[a] = q[a], 0
		for i := 1; i < k; i++ {
			if v := q[i*na+a]; v > g.best[a] {
				g.best[a], g.from[a] = v, i
			}
		}
		if math.IsNaN(g.best[a]) {
			return 0, fmt.Errorf("NaN action value in state %d: %w", s, ErrDiverged)
		}
	}
	a := vec.ArgmaxRandom(g.best, rng)
	g.winner = g.from[a]
	return a, nil
}

func (g *sfqAgent) update(s, a, next int, terminal bool) error {
	if err := g.tds[g.cur].Update(s, a, next, terminal, 0); err != nil {
		return err
	}
	if !g.cfg.currentOnly && g.winner != g.cur {
		if err := g.tds[g.winner].Update(s, a, next, terminal, 0); err != nil {
			return fmt.Errorf("table of task %d: %w", g.winner, err)
		}
	}
	return nil
}

func (g *sfqAgent) policy(dst mdp.Deterministic) error {
	return g.sel.Policy(dst, nil, g.w, g.srcs...)
}

// qAgent is tabular Q-learning with one table kept across tasks.
type qAgent struct {
	m     *mdp.Finite
	phi   sf.FeatureMap
	cfg   learnParams
	q     []float64
	f     []float64
	w     []float64
	steps int
}

func (g *qAgent) begin(i int, w []float64) error {
	g.w = w
	return nil
}

func (g *qAgent) act(s int, rng *rand.Rand) (int, error) {
	na := g.m.NumActions()
	return vec.ArgmaxRandom(g.q[s*na:(s+1)*na], rng), nil
}

func (g *qAgent) update(s, a, next int, terminal bool) error {
	na := g.m.NumActions()
	g.phi.Features(g.f, s, a, next)
	target := vec.Dot(g.f, g.w)
	if !terminal {
		nq := g.q[next*na : (next+1)*na]
		target += g.cfg.gamma * nq[vec.Argmax(nq)]
	}
	i := s*na + a
	g.q[i] += g.cfg.alpha * (target - g.q[i])
	g.steps++
	if v := g.q[i]; math.IsNaN(v) || math.IsInf(v, 0) {
		return fmt.Errorf("non-finite Q at update %d (state %d, action %d): %w", g.steps, s, a, ErrDiverged)
	}
	return nil
}

func (g *qAgent) policy(dst mdp.Deterministic) error {
	na := g.m.NumActions()
	for s := range dst {
		dst[s] = vec.Argmax(g.q[s*na : (s+1)*na])
	}
	return nil
}
