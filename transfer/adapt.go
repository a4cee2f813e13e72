package transfer

import (
	"cmp"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"github.com/successor-go/successor/gpi"
	"github.com/successor-go/successor/internal/vec"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
	"gonum.org/v1/gonum/mat"
)

// Labelled is one reward-labelled transition.
type Labelled struct {
	S, A, Next int
	Reward     float64
	Terminal   bool
}

// Collect gathers k reward-labelled transitions by acting in env with the
// rule cfg.Explore, labelling each with reward(s, a, s'). Episodes start with
// env.Reset and end at a terminal state, a truncation or after
// cfg.EpisodeSteps steps. The rules:
//
//   - ExploreSkills: the agent follows its skills, acting epsilon-greedily
//     (cfg.Epsilon) on psi(s, ., z_k) . z_k and moving to the next skill
//     every cfg.SwitchEvery steps and at every episode start; the skills are
//     taken in a random order without repetition (a fresh random
//     permutation each time all have been used), so the labelled steps
//     spread over the places the skills reach.
//   - ExploreGreedy: the first cfg.Warmup steps as ExploreSkills; then the
//     agent acts epsilon-greedily with the policy Adapt would return from
//     the transitions labelled so far (same cfg), re-inferred every
//     cfg.SwitchEvery steps. Going where it believes the reward is, it
//     labels exactly those places and corrects its belief.
//   - ExploreUniform: every action is uniformly random (ag may be nil).
//
// The labelled transitions are the whole budget: nothing else about the
// task is revealed. The rules never look ahead at k, so the first j
// transitions of a collection of k are a collection of j. Every random
// draw (env's and the rules') comes from rng, which it advances. It
// returns an error wrapping ErrConfig for a nil rng, a negative k, an
// invalid cfg (nil means the defaults) or skill exploration without an
// agent.
func Collect(env mdp.Env, ag *Agent, reward mdp.Reward, k int, cfg *AdaptConfig, rng *rand.Rand) ([]Labelled, error) {
	c, err := orZero(cfg).Resolve()
	if err != nil {
		return nil, err
	}
	if k < 0 {
		return nil, fmt.Errorf("transfer: collect: budget %d: %w", k, ErrConfig)
	}
	if c.Explore != ExploreUniform && ag == nil {
		return nil, fmt.Errorf("transfer: collect: skill exploration needs an agent: %w", ErrConfig)
	}
	if rng == nil {
		return nil, fmt.Errorf("transfer: collect: nil rng: %w", ErrConfig)
	}
	na := env.NumActions()
	out := make([]Labelled, 0, k)
	var order []int
	nextSkill := func() int {
		if len(order) == 0 {
			order = rng.Perm(ag.k)
		}
		k := order[0]
		order = order[1:]
		return k
	}
	var pol *Policy
	empty := 0
	for len(out) < k {
		var skill int
		if c.Explore != ExploreUniform {
			skill = nextSkill()
		}
		s := env.Reset(rng)
		if startDone(env) {
			if empty++; empty >= maxEmpty {
				return nil, fmt.Errorf("transfer: collect: %d episodes in a row start at a terminal state: %w", empty, ErrConfig)
			}
			continue
		}
		empty = 0
		for t := 0; t < c.EpisodeSteps && len(out) < k; t++ {
			greedy := c.Explore == ExploreGreedy && len(out) >= c.Warmup
			if greedy && (len(out)-c.Warmup)%c.SwitchEvery == 0 {
				inf, err := Infer(ag, out, &c)
				if err == nil {
					pol, err = ag.Policy(inf, &c)
				}
				if err != nil {
					return nil, fmt.Errorf("transfer: collect: %w", err)
				}
			}
			if !greedy && c.Explore != ExploreUniform && t > 0 && t%c.SwitchEvery == 0 {
				skill = nextSkill()
			}
			var a int
			switch {
			case c.Explore == ExploreUniform || rng.Float64() < c.Epsilon:
				a = rng.IntN(na)
			case greedy:
				a = pol.Act(s)
			default:
				a = ag.actSkill(skill, s, rng)
			}
			step := env.Step(a, rng)
			out = append(out, Labelled{S: s, A: a, Next: step.Next, Reward: reward(s, a, step.Next), Terminal: step.Terminal()})
			if step.Done() {
				break
			}
			s = step.Next
		}
	}
	return out, nil
}

// Inference is the result of task inference.
type Inference struct {
	// W is the inferred task vector (unit length for sphere methods).
	W []float64
	// Raw is the least-squares solution before normalisation.
	Raw []float64
	// Residual is the root-mean-square regression residual
	// sqrt(mean (r_j - phi_j . Raw)^2) and RSquared = 1 - SSE/SST the
	// fraction of the reward variance explained (1 when the reward is
	// exactly linear in phi). When all labelled rewards are equal there is
	// no variance to explain and RSquared is 0.
	Residual, RSquared float64
	// Lambda is the ridge penalty used, and CV the mean squared
	// leave-one-state-out error when cross-validation chose it (RidgeCV; 0
	// otherwise).
	Lambda, CV float64
	// Rewarded is the number of labelled transitions with a non-zero
	// reward.
	Rewarded int
}

// inferRidge is Infer with the penalty lambda (RidgeFixed).
func inferRidge(ag *Agent, labelled []Labelled, lambda float64) (*Inference, error) {
	if lambda < 0 || math.IsNaN(lambda) || math.IsInf(lambda, 0) {
		return nil, fmt.Errorf("transfer: infer task: penalty %v: %w", lambda, ErrConfig)
	}
	if len(labelled) == 0 {
		return nil, fmt.Errorf("transfer: infer task: %w", ErrNoData)
	}
	d := ag.d
	x := mat.NewDense(len(labelled), d, nil)
	y := make([]float64, len(labelled))
	var ysum, y2 float64
	inf := &Inference{Lambda: lambda}
	for j, t := range labelled {
		ag.Phi(x.RawRowView(j), t.Next)
		y[j] = t.Reward
		ysum += t.Reward
		y2 += t.Reward * t.Reward
		if t.Reward != 0 {
			inf.Rewarded++
		}
	}
	inf.Raw = make([]float64, d)
	fit, err := sf.InferTask(inf.Raw, x, y, lambda, nil)
	if err != nil {
		return nil, fmt.Errorf("transfer: infer task: %w: %w", ErrDiverged, err)
	}
	n := float64(len(labelled))
	inf.Residual = fit.RMS
	if sst := y2 - ysum*ysum/n; sst > 1e-300 {
		inf.RSquared = 1 - fit.RSS/sst
	}
	inf.W = append([]float64(nil), inf.Raw...)
	if ag.cfg.Method.Sphere() && fit.Norm > 0 {
		for i := range inf.W {
			inf.W[i] /= fit.Norm
		}
	}
	return inf, nil
}

// inferCV is Infer with the penalty chosen from grid by cross-validation
// (RidgeCV; nil grid means DefaultRidgeGrid).
func inferCV(ag *Agent, labelled []Labelled, grid []float64) (*Inference, error) {
	if len(labelled) == 0 {
		return nil, fmt.Errorf("transfer: infer task: %w", ErrNoData)
	}
	if grid == nil {
		grid = DefaultRidgeGrid()
	}
	// Distinct next states with counts and reward sums.
	idx := map[int]int{}
	var states []int
	var cnt, sum []float64
	for _, t := range labelled {
		c, ok := idx[t.Next]
		if !ok {
			c = len(states)
			idx[t.Next] = c
			states = append(states, t.Next)
			cnt = append(cnt, 0)
			sum = append(sum, 0)
		}
		cnt[c]++
		sum[c] += t.Reward
	}
	x := mat.NewDense(len(states), ag.d, nil)
	for c, s := range states {
		ag.Phi(x.RawRowView(c), s)
	}
	lam, cv, err := sf.RidgeCV(x, cnt, sum, grid)
	if err != nil {
		return nil, fmt.Errorf("transfer: infer task: %w: %w", ErrConfig, err)
	}
	inf, err := inferRidge(ag, labelled, lam)
	if err != nil {
		return nil, err
	}
	inf.CV = cv
	return inf, nil
}

// Infer is the agent's task inference: it returns the task vector w
// minimising
//
//	sum_j (r_j - phi(s'_j) . w)^2 + lambda ||w||^2
//
// over the labelled transitions (ridge regression on the agent's features
// of the next state, sf.InferTask), normalised to unit length for
// sphere-valued skills. The penalty follows cfg.Ridge: RidgeFixed uses
// cfg.Lambda; RidgeCV (the default) chooses lambda from cfg.RidgeGrid (nil
// means DefaultRidgeGrid) by leave-one-state-out cross-validation on the
// labelled transitions themselves: the features depend on the next state
// only, so the labelled transitions form groups, one per distinct next
// state c (in order of first appearance), with count m_c and reward sum,
// and sf.RidgeCV scores every penalty in closed form,
//
//	CV(lambda) = sum_c ((rbar_c - phi_c . w) / (1 - m_c phi_c' A^-1 phi_c))^2,
//	A = sum_c m_c phi_c phi_c' + lambda I.
//
// This scores how well the fit predicts a place it has not seen, the error
// that misleads the agent (Hastie, Tibshirani & Friedman, The Elements of
// Statistical Learning, 2nd ed., section 7.10, with the held-out unit a
// state). The smallest CV wins; ties go to the later grid entry. The chosen
// penalty is in Inference.Lambda and the mean CV per state in
// Inference.CV; w is then fitted with it on the transitions.
//
// It returns an error wrapping ErrNoData if there are no transitions,
// ErrConfig for an invalid cfg or penalty, and ErrDiverged if the
// regression fails (for example rank-deficient features with lambda = 0,
// or a zero w to normalise).
func Infer(ag *Agent, labelled []Labelled, cfg *AdaptConfig) (*Inference, error) {
	c, err := orZero(cfg).Resolve()
	if err != nil {
		return nil, err
	}
	if c.Ridge == RidgeCV {
		return inferCV(ag, labelled, c.RidgeGrid)
	}
	return inferRidge(ag, labelled, c.Lambda)
}

// Policy is the acting policy after adaptation: GPI with the inferred w over
// a candidate set C of skills of the agent (and, with FitModel, a fitted
// Q(., ., w)),
//
//	pi(s) = argmax_a max_{z in C} psi(s, a, z) . w,
//
// ties to the first candidate, then the lowest action (gpi.Selector.Act).
// It is deterministic, precomputed for every state, implements mdp.Policy
// and is safe for concurrent use.
type Policy struct {
	Inference
	// Fitted reports whether the model-based Q(., ., w) is a candidate
	// (FitModel), and FitSweeps how many value-iteration sweeps the fit
	// took.
	Fitted    bool
	FitSweeps int
	// Candidates are the skill indices in C, most similar to w first.
	Candidates []int
	// Actions is the action of every state.
	Actions mdp.Deterministic
}

// Probs writes the one-hot distribution of the policy's action in s.
func (p *Policy) Probs(dst []float64, s int) { p.Actions.Probs(dst, s) }

// Act returns the policy's action in s.
func (p *Policy) Act(s int) int { return p.Actions[s] }

// Adapt infers the task from the labelled transitions (Infer) and returns
// the acting policy
// (Agent.Policy).
//
// By default (FitNone) this is successor-feature transfer proper: GPI over
// the universal SFs tabulated at the cfg.Candidates skills nearest to w by
// cosine, Q_k(s, a) = psi(s, a, z_k) . w; with GPIOff the policy is greedy
// in psi(s, ., z) . w for the single nearest skill z.
//
// With cfg.Fit = FitModel a model-based candidate joins the set:
// Q(s, a, w), the optimal action value of the inferred reward phi(s') . w
// under the skills' discount, by value iteration on the empirical
// transition model of every reward-free transition the agent took (counts
// kept during pretraining). This uses no environment step and no reward
// label, but it is model-based evaluation of the inferred task, not
// successor-feature transfer; state-action pairs never tried have no
// fitted value and are left to the skills.
func Adapt(ag *Agent, labelled []Labelled, cfg *AdaptConfig) (*Policy, error) {
	c, err := orZero(cfg).Resolve()
	if err != nil {
		return nil, err
	}
	inf, err := Infer(ag, labelled, &c)
	if err != nil {
		return nil, err
	}
	return ag.Policy(inf, &c)
}

// Policy returns the acting policy for an inferred task,
//
//	pi(s) = argmax_a max( Q_w(s, a), max_{k in C} psi(s, a, z_k) . w ),
//
// with C the cfg.Candidates skills most similar to w (cosine) and Q_w the
// model-based fit of FitModel (absent with FitNone, the default). With
// GPIOff, C is the single nearest skill under FitNone and empty under
// FitModel. Ties go to Q_w, then to the most
// similar skill, then to the lowest action. It returns an error wrapping
// ErrNoData if a fit is asked for and there are no reward-free transitions,
// ErrDiverged, or ErrConfig.
func (ag *Agent) Policy(inf *Inference, cfg *AdaptConfig) (*Policy, error) {
	c, err := orZero(cfg).Resolve()
	if err != nil {
		return nil, err
	}
	type sim struct {
		k int
		c float64
	}
	sims := make([]sim, ag.k)
	for k := range ag.k {
		zk := ag.Skill(k)
		sims[k] = sim{k, vec.DotSeq(zk, inf.W) / math.Sqrt(vec.DotSeq(zk, zk))}
	}
	slices.SortStableFunc(sims, func(x, y sim) int { return cmp.Compare(y.c, x.c) })
	pol := &Policy{Inference: *inf}
	m := min(c.Candidates, ag.k)
	if c.GPI == GPIOff {
		m = 1
	}
	var qw []float64
	if c.Fit == FitModel {
		qw, pol.FitSweeps, err = ag.fitQ(inf.W, c.FitSweeps)
		if err != nil {
			return nil, err
		}
		pol.Fitted = true
		if c.GPI == GPIOff {
			m = 0
		}
	}
	srcs := make([]gpi.Source, m)
	for i := range m {
		pol.Candidates = append(pol.Candidates, sims[i].k)
		srcs[i] = ag.Source(sims[i].k)
	}
	var sel gpi.Selector
	pol.Actions = make(mdp.Deterministic, ag.n)
	na := ag.a
	for s := range ag.n {
		best, act := math.Inf(-1), -1
		if qw != nil {
			for a, v := range qw[s*na : (s+1)*na] {
				if v > best {
					best, act = v, a
				}
			}
		}
		if len(srcs) > 0 {
			a, _, v := sel.Act(inf.W, s, srcs...)
			if v > best || act < 0 {
				best, act = v, a
			}
		}
		if act < 0 {
			act = 0 // no candidate knows s (no fitted value, GPI off)
		}
		pol.Actions[s] = act
	}
	return pol, nil
}

// fitQ returns Q_w(s, a) = psi(s, a, w) . w of the policy greedy in it, by
// Gauss-Seidel value iteration on the empirical model of the reward-free
// transitions with reward phi(s') . w and discount gamma of the skills, for
// at most sweeps sweeps or until the largest change is below 1e-9
// (1 + max |Q|). Pairs never tried get -Inf; states with no known action count
// as value 0 when bootstrapped from.
func (ag *Agent) fitQ(w []float64, sweeps int) ([]float64, int, error) {
	mod := ag.model()
	if mod == nil {
		return nil, 0, fmt.Errorf("transfer: adapt: fit needs reward-free transitions: %w", ErrNoData)
	}
	n, na, d := ag.n, ag.a, ag.d
	r := make([]float64, n)
	for s := range n {
		r[s] = vec.DotSeq(ag.phiTab[s*d:(s+1)*d], w)
	}
	q := make([]float64, n*na)
	v := make([]float64, n)
	for i := range q {
		if mod.ptr[i] == mod.ptr[i+1] {
			q[i] = math.Inf(-1)
		}
	}
	g := ag.cfg.SkillGamma
	done := 0
	for done < sweeps {
		done++
		var change, scale float64
		// Backwards over states: values flow against the direction most
		// episodes of a grid are stored in; any order converges.
		for s := n - 1; s >= 0; s-- {
			best := math.Inf(-1)
			for a := range na {
				i := s*na + a
				lo, hi := mod.ptr[i], mod.ptr[i+1]
				if lo == hi {
					continue
				}
				var x float64
				for k := lo; k < hi; k++ {
					nx := mod.next[k]
					t := r[nx]
					if !mod.term[k] {
						t += g * v[nx]
					}
					x += mod.prob[k] * t
				}
				change = max(change, math.Abs(x-q[i]))
				scale = max(scale, math.Abs(x))
				q[i] = x
				best = max(best, x)
			}
			if best > math.Inf(-1) {
				v[s] = best
			}
		}
		if math.IsNaN(change) || math.IsInf(scale, 0) {
			return nil, done, fmt.Errorf("transfer: adapt: fitted values: %w", ErrDiverged)
		}
		if change <= 1e-9*(1+scale) {
			break
		}
	}
	return q, done, nil
}

// empirical is the empirical transition model of the reward-free data: for
// pair i = s*A + a the entries ptr[i]:ptr[i+1] of next, prob and term.
type empirical struct {
	ptr  []int
	next []int
	prob []float64
	term []bool
}

// model returns the empirical model of every reward-free transition the
// agent has taken (nil if none), built once after training and cached.
func (ag *Agent) model() *empirical {
	ag.modelMu.Lock()
	defer ag.modelMu.Unlock()
	if ag.emp != nil || len(ag.counts) == 0 {
		return ag.emp
	}
	keys := sortedKeys(ag.counts)
	npairs := ag.n * ag.a
	e := &empirical{ptr: make([]int, npairs+1)}
	tot := make([]int64, npairs)
	for _, key := range keys {
		tot[int(key>>1)/ag.n] += ag.counts[key]
	}
	for _, key := range keys {
		p, next := int(key>>1)/ag.n, int(key>>1)%ag.n
		e.next = append(e.next, next)
		e.prob = append(e.prob, float64(ag.counts[key])/float64(tot[p]))
		e.term = append(e.term, key&1 == 1)
		e.ptr[p+1] = len(e.next)
	}
	for p := range npairs {
		e.ptr[p+1] = max(e.ptr[p+1], e.ptr[p])
	}
	ag.emp = e
	return e
}

// sortedKeys returns the keys of m in increasing order: by pair, then next
// state, then non-terminal before terminal.
func sortedKeys(m map[uint64]int64) []uint64 {
	keys := make([]uint64, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	return keys
}
