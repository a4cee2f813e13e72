package transfer

import (
	"cmp"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"github.com/successor-go/successor/gpi"
	"github.com/successor-go/successor/mdp"
	"gonum.org/v1/gonum/mat"
)

// Transition is one reward-labelled transition.
type Transition struct {
	S, A, Next int
	Reward     float64
	Terminal   bool
}

// Collect gathers k reward-labelled transitions by acting in env with the
// rule cfg.Explore, labelling each with reward(s, a, s'). Episodes start with
// env.Reset and end at a terminal state, a truncation or after
// cfg.EpisodeSteps steps. With ExploreSkills the agent follows its skills,
// acting epsilon-greedily (cfg.Epsilon) on psi(s, ., z_k) . z_k and
// switching to the next skill every cfg.SwitchEvery steps and at every
// episode start; the skills are taken in a random order without repetition
// (a fresh random permutation each time all have been used), so the
// labelled steps spread over the places the skills reach; with ExploreUniform every action is uniformly random
// (ag may then be nil). The labelled transitions are the whole budget:
// nothing else about the task is revealed. seed determines the draws.
func Collect(env mdp.Env, ag *Agent, reward mdp.Reward, k int, cfg AdaptConfig, seed uint64) ([]Transition, error) {
	c, err := cfg.withDefaults()
	if err != nil {
		return nil, err
	}
	if k < 0 {
		return nil, fmt.Errorf("transfer: collect: budget %d: %w", k, ErrConfig)
	}
	if c.Explore == ExploreSkills && ag == nil {
		return nil, fmt.Errorf("transfer: collect: skill exploration needs an agent: %w", ErrConfig)
	}
	rng := rand.New(rand.NewPCG(seed, streamCollect))
	na := env.NumActions()
	out := make([]Transition, 0, k)
	var order []int
	nextSkill := func() int {
		if len(order) == 0 {
			order = rng.Perm(ag.k)
		}
		k := order[0]
		order = order[1:]
		return k
	}
	for len(out) < k {
		var skill int
		if c.Explore == ExploreSkills {
			skill = nextSkill()
		}
		s := env.Reset(rng)
		for t := 0; t < c.EpisodeSteps && len(out) < k; t++ {
			if c.Explore == ExploreSkills && t > 0 && t%c.SwitchEvery == 0 {
				skill = nextSkill()
			}
			var a int
			if c.Explore == ExploreUniform || rng.Float64() < c.Epsilon {
				a = rng.IntN(na)
			} else {
				a = ag.actSkill(skill, s, rng)
			}
			next, term, trunc := env.Step(a, rng)
			out = append(out, Transition{S: s, A: a, Next: next, Reward: reward(s, a, next), Terminal: term})
			if term || trunc {
				break
			}
			s = next
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
	// Rewarded is the number of labelled transitions with a non-zero
	// reward.
	Rewarded int
}

// InferTask returns the task vector w minimising
//
//	sum_j (r_j - phi(s'_j) . w)^2 + lambda ||w||^2
//
// over the labelled transitions (ridge regression on the agent's features of
// the next state), normalised to unit length for sphere-valued skills. It
// returns an error wrapping ErrNoData if there are no transitions.
func InferTask(ag *Agent, labelled []Transition, lambda float64) (*Inference, error) {
	if len(labelled) == 0 {
		return nil, fmt.Errorf("transfer: infer task: %w", ErrNoData)
	}
	d := ag.d
	var xtx mat.SymDense
	xtx.ReuseAsSym(d)
	xty := mat.NewVecDense(d, nil)
	phi := make([]float64, d)
	var ysum, y2 float64
	for _, t := range labelled {
		ag.Phi(phi, t.Next)
		for i := range d {
			xty.SetVec(i, xty.AtVec(i)+phi[i]*t.Reward)
			for j := i; j < d; j++ {
				xtx.SetSym(i, j, xtx.At(i, j)+phi[i]*phi[j])
			}
		}
		ysum += t.Reward
		y2 += t.Reward * t.Reward
	}
	for i := range d {
		xtx.SetSym(i, i, xtx.At(i, i)+lambda)
	}
	var w mat.VecDense
	var chol mat.Cholesky
	if ok := chol.Factorize(&xtx); ok {
		if err := chol.SolveVecTo(&w, xty); err != nil {
			return nil, fmt.Errorf("transfer: infer task: %w", err)
		}
	} else {
		// Rank-deficient without a penalty: the minimum-norm solution.
		if err := w.SolveVec(&xtx, xty); err != nil {
			return nil, fmt.Errorf("transfer: infer task: singular features (set a ridge penalty): %w", err)
		}
	}
	raw := make([]float64, d)
	copy(raw, w.RawVector().Data)
	var sse float64
	for _, t := range labelled {
		ag.Phi(phi, t.Next)
		e := t.Reward - dot(phi, raw)
		sse += e * e
	}
	n := float64(len(labelled))
	inf := &Inference{Raw: raw, W: append([]float64(nil), raw...), Residual: math.Sqrt(sse / n)}
	sst := y2 - ysum*ysum/n
	if sst > 1e-300 {
		inf.RSquared = 1 - sse/sst
	}
	for _, t := range labelled {
		if t.Reward != 0 {
			inf.Rewarded++
		}
	}
	if ag.cfg.Method.Sphere() {
		nrm := math.Sqrt(dot(raw, raw))
		if nrm > 0 {
			for i := range inf.W {
				inf.W[i] /= nrm
			}
		}
	}
	for _, v := range raw {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("transfer: infer task: %w", ErrDiverged)
		}
	}
	return inf, nil
}

// Policy is the acting policy after adaptation: GPI with the inferred w over
// a candidate set C of task vectors (w itself and skills of the agent),
//
//	pi(s) = argmax_a max_{z in C} psi(s, a, z) . w,
//
// ties to the first candidate, then the lowest action (gpi.Selector.Act).
// It is deterministic, precomputed for every state, implements mdp.Policy
// and is safe for concurrent use.
type Policy struct {
	Inference
	// Fitted reports whether psi(., ., w) itself is the first candidate.
	Fitted bool
	// Candidates are the skill indices in C, most similar to w first.
	Candidates []int
	// Actions is the action of every state.
	Actions mdp.Deterministic
}

// Probs writes the one-hot distribution of the policy's action in s.
func (p *Policy) Probs(dst []float64, s int) { p.Actions.Probs(dst, s) }

// Act returns the policy's action in s.
func (p *Policy) Act(s int) int { return p.Actions[s] }

// Adapt infers the task from the labelled transitions (InferTask with
// cfg.Ridge) and returns the GPI policy (Agent.Policy) over {w} and the
// cfg.Candidates skills most similar to w.
//
// The universal SFs are tabulated over the skill set, so psi(., ., w) is not
// stored; Adapt fits it the way the set was trained: cfg.Fit TD updates on
// transitions drawn from the agent's reward-free replay buffer with the
// intrinsic reward phi(s') . w, newest transitions first and backwards in
// time, starting from zero. This uses no environment step and no reward
// label. With a negative
// cfg.Fit the candidate set is the cfg.Candidates + 1 skills nearest to w
// (GPI over the stored library only).
func Adapt(ag *Agent, labelled []Transition, cfg AdaptConfig) (*Policy, error) {
	c, err := cfg.withDefaults()
	if err != nil {
		return nil, err
	}
	inf, err := InferTask(ag, labelled, c.Ridge)
	if err != nil {
		return nil, err
	}
	return ag.Policy(inf, cfg)
}

// Policy returns the GPI policy for an inferred task. With cfg.Fit > 0
// (after defaults) the candidates are psi(., ., w) fitted on the replay
// buffer plus the cfg.Candidates skills most similar to w; otherwise the
// cfg.Candidates + 1 skills most similar to w. Candidates = 0 switches GPI
// off. It returns an error wrapping ErrNoData if a fit is asked for and the
// replay buffer is empty, or ErrDiverged.
func (ag *Agent) Policy(inf *Inference, cfg AdaptConfig) (*Policy, error) {
	c, err := cfg.withDefaults()
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
		sims[k] = sim{k, dot(zk, inf.W) / math.Sqrt(dot(zk, zk))}
	}
	slices.SortStableFunc(sims, func(x, y sim) int { return cmp.Compare(y.c, x.c) })
	var srcs []gpi.Source
	pol := &Policy{Inference: *inf}
	m := min(c.Candidates+1, ag.k)
	if c.Fit > 0 {
		tab, err := ag.fit(inf.W, c.Fit)
		if err != nil {
			return nil, err
		}
		srcs = append(srcs, tableSource{tab: tab, a: ag.a, d: ag.d})
		pol.Fitted = true
		m = min(c.Candidates, ag.k)
	}
	for i := range m {
		pol.Candidates = append(pol.Candidates, sims[i].k)
		srcs = append(srcs, ag.Source(sims[i].k))
	}
	var sel gpi.Selector
	pol.Actions = make(mdp.Deterministic, ag.n)
	for s := range ag.n {
		a, _, _ := sel.Act(inf.W, s, srcs...)
		if a < 0 {
			a = 0 // NaN cannot occur: training, fit and InferTask reject non-finite values.
		}
		pol.Actions[s] = a
	}
	return pol, nil
}

// fit returns psi(., ., w) fitted by updates TD steps on replayed
// transitions, newest first and backwards in time, starting from zero.
// (Starting from the nearest skill's table was tried: its values of
// self-loops decay only as gamma^n and misled the greedy policy.)
func (ag *Agent) fit(w []float64, updates int) ([]float64, error) {
	rb := &ag.replay
	if rb.count == 0 {
		return nil, fmt.Errorf("transfer: adapt: fit needs the replay buffer: %w", ErrNoData)
	}
	d, na := ag.d, ag.a
	tab := make([]float64, ag.n*na*d)
	g, lr := ag.cfg.Gamma, ag.cfg.LearnRate
	for u := range updates {
		// Newest first, backwards through time, cyclically: a backward pass
		// over an episode carries values along it in one sweep (as in the
		// episodic backward update of Lee et al. 2019).
		i := ((rb.pos-1-u)%rb.count + rb.count) % rb.count
		s, a, next := int(rb.s[i]), int(rb.a[i]), int(rb.next[i])
		phi := ag.phi[next*d : (next+1)*d]
		row := tab[(s*na+a)*d : (s*na+a+1)*d]
		var nb []float64
		if !rb.term[i] {
			rows := tab[next*na*d : (next+1)*na*d]
			b := argmaxRows(rows, w, na, nil)
			nb = rows[b*d : (b+1)*d]
		}
		for j := range d {
			t := phi[j]
			if nb != nil {
				t += g * nb[j]
			}
			row[j] += lr * (t - row[j])
		}
	}
	for _, v := range tab {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("transfer: adapt: fitted successor features: %w", ErrDiverged)
		}
	}
	return tab, nil
}

// tableSource is a GPI source over a flat psi table.
type tableSource struct {
	tab  []float64
	a, d int
}

func (t tableSource) Shape() (int, int) { return t.a, t.d }
func (t tableSource) State(s int) []float64 {
	n := t.a * t.d
	return t.tab[s*n : (s+1)*n : (s+1)*n]
}
func (t tableSource) Psi(dst []float64, s int) { copy(dst, t.State(s)) }
