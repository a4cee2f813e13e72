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
	// sqrt(mean (r_j - phi_j . Raw)^2) and RSquared the fraction of the
	// reward variance explained (1 when the reward is exactly linear in
	// phi; 0 when the fit is no better than a constant; NaN-free: 1 when
	// all rewards are equal and fitted exactly, 0 otherwise).
	Residual, RSquared float64
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
	switch {
	case sst > 1e-300:
		inf.RSquared = 1 - sse/sst
	case sse <= 1e-24:
		inf.RSquared = 1
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
// a candidate set C of the agent's skills,
//
//	pi(s) = argmax_a max_{k in C} psi(s, a, z_k) . w,
//
// ties to the first candidate, then the lowest action (gpi.Selector.Act).
// It is deterministic, precomputed for every state, implements mdp.Policy
// and is safe for concurrent use.
type Policy struct {
	Inference
	// Candidates are the skill indices of C, most similar to w first.
	Candidates []int
	// Actions is the action of every state.
	Actions mdp.Deterministic
}

// Probs writes the one-hot distribution of the policy's action in s.
func (p *Policy) Probs(dst []float64, s int) { p.Actions.Probs(dst, s) }

// Act returns the policy's action in s.
func (p *Policy) Act(s int) int { return p.Actions[s] }

// Adapt infers the task from the labelled transitions (InferTask with
// cfg.Ridge) and returns the GPI policy over the cfg.Candidates + 1 skills
// most similar to w (largest cosine z_k . w / ||z_k||, ties to the lower
// index). With cfg.Candidates = 0 there is one candidate, the skill
// nearest to w, and the policy is greedy in psi(s, ., z_k) . w: GPI off.
//
// (The universal SFs are tabulated over the skill set, so psi is known at
// the skills only; the candidate set "w plus N vectors drawn around w" of
// a continuous approximator becomes the N + 1 skills nearest to w.)
func Adapt(ag *Agent, labelled []Transition, cfg AdaptConfig) (*Policy, error) {
	c, err := cfg.withDefaults()
	if err != nil {
		return nil, err
	}
	inf, err := InferTask(ag, labelled, c.Ridge)
	if err != nil {
		return nil, err
	}
	return ag.Policy(inf, c.Candidates), nil
}

// Policy returns the GPI policy for an inferred task over the n + 1 skills
// most similar to inf.W (all skills if n + 1 >= NumSkills).
func (ag *Agent) Policy(inf *Inference, n int) *Policy {
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
	m := min(n+1, ag.k)
	cands := make([]int, m)
	srcs := make([]gpi.Source, m)
	for i := range m {
		cands[i] = sims[i].k
		srcs[i] = ag.Source(sims[i].k)
	}
	var sel gpi.Selector
	acts := make(mdp.Deterministic, ag.n)
	for s := range ag.n {
		a, _, _ := sel.Act(inf.W, s, srcs...)
		if a < 0 {
			a = 0 // NaN cannot occur: training and InferTask reject non-finite values.
		}
		acts[s] = a
	}
	return &Policy{Inference: *inf, Candidates: cands, Actions: acts}
}
