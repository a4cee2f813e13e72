package transfer

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sync"

	"github.com/successor-go/successor/gpi"
	"github.com/successor-go/successor/internal/vec"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
	"github.com/successor-go/successor/skills"
	"github.com/successor-go/successor/usf"
)

// Env is a sampled environment with finitely many integer states; the agent
// observes the state as a one-hot vector, so its discriminator and
// universal successor features are tables over states. *mdp.Sampler
// implements it.
type Env interface {
	mdp.Env
	NumStates() int
}

var _ Env = (*mdp.Sampler)(nil)

// Agent is a pretrained agent, composed of the library's pieces:
//
//   - the features phi(s): a skills.VMF or skills.Softmax discriminator,
//     linear on the one-hot observation of s (f(x) = x W + b, so tabular),
//     for VMF and Categorical; fixed rows (sf.NextState) for Random and
//     Given;
//   - a finite skill set z_1..z_K, drawn once from the prior
//     skills.UniformSphere (VMF, Random, Given) or the K one-hot vectors of
//     skills.Categorical, with task vectors w_k = TaskVector(z_k) (w = z for
//     the sphere methods, (e_k, 1) for Categorical);
//   - the universal successor features psi(s, a, w_k), a usf.Tabular over
//     the task vectors (one sf.Table per skill), learned by its relabelled
//     greedy TD update (usf.Tabular.UpdateRelabel), whose cached action
//     values psi . w_k give each skill's policy;
//   - a usf.Replay of the reward-free transitions.
//
// For any other z, Psi uses the skill most similar to z (largest cosine).
//
// An Agent also carries its training state (replay buffer, random
// generator, counters) so that a checkpoint resumes bit-identically. It is
// not safe for concurrent use while training; after training its read
// methods (Phi, Psi, Q, Skill, Source, Policy) may be called concurrently.
type Agent struct {
	cfg        PretrainConfig // resolved
	n, a, d, k int            // states, actions, feature dimension, skills

	disc  skills.Discriminator // VMF and Categorical; nil otherwise
	prior skills.Prior
	fixed *sf.NextState // Random and Given; nil otherwise
	zs    [][]float64   // skill vectors z_k (prior space)
	usf   *usf.Tabular  // psi(., ., w_k); usf.Z[k] = TaskVector(z_k)
	buf   *usf.Replay
	// counts holds the empirical model of the reward-free data: the
	// number of transitions (s, a, s', terminal), keyed by modelKey.
	counts map[uint64]int64

	// Training state.
	pcg            *rand.PCG
	rng            *rand.Rand
	steps          int
	episodes       int
	nextProgress   int
	nextCheckpoint int
	acc            accum
	td             usf.TDStats // since the last report

	// Scratch of update.
	smp    *usf.Batch // sampled transitions
	skillK []int      // their skill indices
	x, z   []float64  // discriminator minibatch
	obs    []float64  // one-hot observation
	tr     usf.Entry

	// phi of every state, tabulated when training stops, for the read
	// methods.
	phiTab []float64

	// The empirical model, built on first use by Policy with FitModel and
	// dropped when training continues.
	modelMu sync.Mutex
	emp     *empirical
}

// NumStates returns the number of states the agent was trained on.
func (ag *Agent) NumStates() int { return ag.n }

// NumActions returns the number of actions.
func (ag *Agent) NumActions() int { return ag.a }

// Dim returns the feature dimension d (PretrainConfig.Dim resolved: K+1
// for Categorical with K skills, skills.Softmax's features log q(. | s)
// and the constant log K).
func (ag *Agent) Dim() int { return ag.d }

// Method returns the pretraining method.
func (ag *Agent) Method() Method { return ag.cfg.Method }

// Config returns the resolved pretraining configuration (for an agent read
// from a checkpoint, without Features: the phi table stands for them).
func (ag *Agent) Config() PretrainConfig { return ag.cfg }

// Steps returns the number of pretraining environment steps taken so far.
func (ag *Agent) Steps() int { return ag.steps }

// Episodes returns the number of pretraining episodes finished so far.
func (ag *Agent) Episodes() int { return ag.episodes }

// Discriminator returns the learned discriminator (VMF and Categorical), or
// nil. It must not be trained further while the agent is in use.
func (ag *Agent) Discriminator() skills.Discriminator { return ag.disc }

// USF returns the universal successor features, tabulated over the task
// vectors of the skill set. It must not be modified.
func (ag *Agent) USF() *usf.Tabular { return ag.usf }

// Phi writes the features phi(s) into dst (len Dim). It panics if len(dst)
// or s is out of range.
func (ag *Agent) Phi(dst []float64, s int) {
	if len(dst) != ag.d {
		panic("transfer: phi: wrong length")
	}
	copy(dst, ag.phiTab[s*ag.d:(s+1)*ag.d])
}

// NumSkills returns K, the size of the skill set.
func (ag *Agent) NumSkills() int { return ag.k }

// Skill returns a view of the task vector w_k = TaskVector(z_k) of skill k
// (len Dim; for the sphere methods the skill vector z_k itself). It must
// not be modified.
func (ag *Agent) Skill(k int) []float64 { return ag.usf.Z[k] }

// Nearest returns the index of the skill whose task vector has the largest
// cosine similarity to w (ties to the lowest index). It panics if
// len(w) != Dim.
func (ag *Agent) Nearest(w []float64) int {
	if len(w) != ag.d {
		panic("transfer: nearest: wrong length")
	}
	best, arg := math.Inf(-1), 0
	for k := range ag.k {
		zk := ag.Skill(k)
		c := vec.DotSeq(zk, w) / math.Sqrt(vec.DotSeq(zk, zk))
		if c > best {
			best, arg = c, k
		}
	}
	return arg
}

// SkillState returns a view of psi(s, ., w_k), action-major (A rows of d
// values). It must not be modified.
func (ag *Agent) SkillState(k, s int) []float64 { return ag.usf.Tables[k].State(s) }

// Psi writes psi(s, a, z) for every action a into dst, action-major
// (dst[a*Dim + k]), from the skill nearest to z. It panics if
// len(dst) != NumActions*Dim, len(z) != Dim or s is out of range.
func (ag *Agent) Psi(dst []float64, s int, z []float64) {
	if len(dst) != ag.a*ag.d {
		panic("transfer: psi: wrong length")
	}
	copy(dst, ag.SkillState(ag.Nearest(z), s))
}

// Q writes Q(s, a) = psi(s, a, z) . w for every action into dst (len
// NumActions), psi from the skill nearest to z. It panics on wrong lengths.
func (ag *Agent) Q(dst []float64, s int, z, w []float64) {
	if len(dst) != ag.a || len(w) != ag.d {
		panic("transfer: q: wrong length")
	}
	psi := ag.SkillState(ag.Nearest(z), s)
	for a := range ag.a {
		dst[a] = vec.DotSeq(psi[a*ag.d:(a+1)*ag.d], w)
	}
}

// Source returns the successor features of skill k as a GPI source: the
// skill's sf.Table, read in place.
func (ag *Agent) Source(k int) gpi.Source { return ag.usf.Tables[k] }

// actSkill returns argmax_a psi(s, a, w_k) . w_k from the cached action
// values of the USF, ties broken uniformly at random with rng (nil rng:
// the lowest action).
func (ag *Agent) actSkill(k, s int, rng *rand.Rand) int {
	return vec.ArgmaxReservoir(ag.usf.Values(k, s), rng)
}

// newAgent allocates an agent for the resolved configuration c and
// initialises its parameters from the run's generator.
func newAgent(n, na int, c PretrainConfig) (*Agent, error) {
	if n <= 0 || na <= 0 {
		return nil, fmt.Errorf("transfer: environment with %d states and %d actions: %w", n, na, ErrConfig)
	}
	ag := &Agent{cfg: c, n: n, a: na}
	ag.pcg = rand.NewPCG(c.Seed, streamPretrain)
	ag.rng = rand.New(ag.pcg)
	var err error
	opt := skills.OptimConfig{StepSize: c.DiscStepSize, Method: c.DiscOptim}
	switch c.Method {
	case VMF:
		ag.disc, err = skills.NewVMF(&skills.VMFConfig{In: n, Dim: c.Dim, Kappa: c.Kappa, Optim: opt}, ag.rng)
	case Categorical:
		ag.disc, err = skills.NewSoftmax(&skills.SoftmaxConfig{In: n, K: c.Skills, Optim: opt}, ag.rng)
	case Random:
		ag.fixed, err = sf.NewRandom(n, c.Dim, true, ag.rng)
	case Given:
		rows := make([][]float64, n)
		for s := range rows {
			rows[s] = make([]float64, c.Dim)
			c.Features.Features(rows[s], s, 0, s)
		}
		ag.fixed, err = sf.NewNextState(rows)
	}
	if err != nil {
		return nil, fmt.Errorf("transfer: %s features: %w: %w", c.Method, ErrConfig, err)
	}
	ag.k = c.Skills
	if c.Method == Categorical {
		ag.prior = skills.Categorical{K: ag.k}
		for k := range ag.k {
			z := make([]float64, ag.k)
			z[k] = 1 // the prior's support, e_k, in order
			ag.zs = append(ag.zs, z)
		}
	} else {
		ag.prior = skills.UniformSphere{D: c.Dim}
		for range ag.k {
			z := make([]float64, c.Dim)
			ag.prior.Sample(z, ag.rng)
			ag.zs = append(ag.zs, z)
		}
	}
	if err := ag.init(n, na, c.Replay, nil, nil); err != nil {
		return nil, err
	}
	ag.counts = map[uint64]int64{}
	ag.nextProgress = c.ProgressEvery
	if c.CheckpointEvery > 0 {
		ag.nextCheckpoint = c.CheckpointEvery
	}
	return ag, nil
}

// init sets the feature dimension and builds the USF over the task vectors
// of ag.zs (or takes tab), the replay (or takes buf) and the scratch.
func (ag *Agent) init(n, na, capacity int, tab *usf.Tabular, buf *usf.Replay) error {
	if ag.disc != nil {
		ag.d = ag.disc.FeatureDim()
	} else {
		ag.d = ag.fixed.Dim()
	}
	d := ag.d
	if tab == nil {
		ws := make([][]float64, ag.k)
		for k, z := range ag.zs {
			ws[k] = make([]float64, d)
			ag.taskVector(ws[k], z)
		}
		var err error
		tab, err = usf.NewTabular(n, na, ws, ag.cfg.SkillGamma, &usf.TabularConfig{Schedule: sf.StepSchedule{StepSize: ag.cfg.StepSize}})
		if err != nil {
			return fmt.Errorf("transfer: %w: %w", ErrConfig, err)
		}
	}
	ag.usf = tab
	// Build the cache of action values now, so that the read methods may
	// be called concurrently.
	tab.Values(0, 0)
	if buf == nil {
		var err error
		buf, err = usf.NewReplay(capacity, 0, d)
		if err != nil {
			return fmt.Errorf("transfer: %w: %w", ErrConfig, err)
		}
	}
	ag.buf = buf
	b := ag.cfg.Batch
	ag.smp = usf.NewBatch(b, 0, d)
	ag.skillK = make([]int, b)
	ag.x = make([]float64, b*n)
	ag.z = make([]float64, b*len(ag.zs[0]))
	ag.obs = make([]float64, n)
	ag.tr = usf.Entry{Phi: make([]float64, d), Z: make([]float64, d), NextA: -1}
	ag.tabulatePhi()
	return nil
}

// taskVector writes the task vector of skill vector z.
func (ag *Agent) taskVector(dst, z []float64) {
	if ag.disc != nil {
		ag.disc.TaskVector(dst, z)
		return
	}
	copy(dst, z)
}

// features writes phi(s) from the live discriminator or the fixed rows.
// Not safe for concurrent use.
func (ag *Agent) features(dst []float64, s int) {
	if ag.disc == nil {
		copy(dst, ag.fixed.Row(s))
		return
	}
	ag.obs[s] = 1
	ag.disc.Features(dst, ag.obs)
	ag.obs[s] = 0
}

// tabulatePhi fills phiTab from the current features.
func (ag *Agent) tabulatePhi() {
	if len(ag.phiTab) != ag.n*ag.d {
		ag.phiTab = make([]float64, ag.n*ag.d)
	}
	for s := range ag.n {
		ag.features(ag.phiTab[s*ag.d:(s+1)*ag.d], s)
	}
}

// modelKey packs a transition (s, a, s', terminal) into a map key.
func (ag *Agent) modelKey(s, a, next int, term bool) uint64 {
	k := (uint64(s*ag.a+a)*uint64(ag.n) + uint64(next)) << 1
	if term {
		k |= 1
	}
	return k
}

// streamPretrain is the PCG stream of a pretraining run's generator,
// seeded with PretrainConfig.Seed. (Collect and MonteCarlo, which took
// seeds with streams 2 and 5, now take a *rand.Rand; package experiment
// makes its generators with the streams the figures were defined with.)
const streamPretrain = 1
