package transfer

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sync"

	"github.com/successor-go/successor/gpi"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/skills"
)

// Env is a sampled environment with finitely many integer states; the agent
// observes the state as a one-hot vector, so its discriminator and
// universal successor features are tables over states.
type Env interface {
	mdp.Env
	NumStates() int
}

// Agent is a pretrained agent: the features phi(s) of every state (learned
// by a discriminator, random or given), a finite set of K skill vectors
// z_1..z_K (for sphere methods drawn once, uniformly on the unit sphere,
// from the run's seed; for Categorical the K one-hot vectors), and the
// universal successor features tabulated over that set: for every skill k
// a table psi(s, a, z_k) in R^d over state-action pairs, the SFs of the
// policy greedy in psi(s, ., z_k) . z_k. For any other z, Psi uses the
// skill most similar to z (largest cosine).
//
// An Agent also carries its training state (replay buffer, random
// generator, counters) so that a checkpoint resumes bit-identically. It is
// not safe for concurrent use while training; after training its read
// methods (Phi, Psi, Q, Skill, Source) may be called concurrently.
type Agent struct {
	cfg        PretrainConfig // with defaults applied
	n, a, d, k int

	// param holds the discriminator's parameters: f(s) for VMF, logits for
	// Categorical, phi itself for Random and Given. n*d values.
	param []float64
	// phi caches the features of every state. n*d values.
	phi []float64
	// skills holds z_1..z_K, k*d values.
	skills []float64
	// usf holds psi(s, a, z_k) at [((k*n + s)*A + a)*d:][:d].
	usf []float64
	// q caches Q(s, a, z_k) = psi(s, a, z_k) . z_k at (k*n + s)*A + a,
	// updated incrementally with every TD step (so the greedy action costs
	// A, not A*d, operations; it agrees with the dot product to round-off).
	q []float64
	// logC is log C_d(kappa) for VMF; logArea the log area of S^{d-1}.
	logC, logArea float64

	// Training state.
	pcg            *rand.PCG
	rng            *rand.Rand
	replay         replay
	steps          int
	episodes       int
	nextProgress   int
	nextCheckpoint int
	acc            accum

	// Scratch.
	target []float64

	// The empirical model of the replay buffer, built on first use by
	// Policy and dropped when training continues.
	modelMu sync.Mutex
	emp     *empirical
}

// NumStates returns the number of states the agent was trained on.
func (ag *Agent) NumStates() int { return ag.n }

// NumActions returns the number of actions.
func (ag *Agent) NumActions() int { return ag.a }

// Dim returns the feature dimension d (the number of skills K for
// Categorical).
func (ag *Agent) Dim() int { return ag.d }

// Method returns the pretraining method.
func (ag *Agent) Method() Method { return ag.cfg.Method }

// Config returns the pretraining configuration with defaults applied.
func (ag *Agent) Config() PretrainConfig { return ag.cfg }

// Steps returns the number of pretraining environment steps taken so far.
func (ag *Agent) Steps() int { return ag.steps }

// Episodes returns the number of pretraining episodes finished so far.
func (ag *Agent) Episodes() int { return ag.episodes }

// Phi writes the features phi(s) into dst (len Dim). It panics if len(dst)
// or s is out of range.
func (ag *Agent) Phi(dst []float64, s int) {
	if len(dst) != ag.d {
		panic("transfer: phi: wrong length")
	}
	copy(dst, ag.phi[s*ag.d:(s+1)*ag.d])
}

// NumSkills returns K, the size of the skill set.
func (ag *Agent) NumSkills() int { return ag.k }

// Skill returns a view of skill vector z_k. It must not be modified.
func (ag *Agent) Skill(k int) []float64 { return ag.skills[k*ag.d : (k+1)*ag.d : (k+1)*ag.d] }

// Nearest returns the index of the skill with the largest cosine
// similarity to z (ties to the lowest index). It panics if len(z) != Dim.
func (ag *Agent) Nearest(z []float64) int {
	if len(z) != ag.d {
		panic("transfer: nearest: wrong length")
	}
	best, arg := math.Inf(-1), 0
	for k := range ag.k {
		zk := ag.Skill(k)
		c := dot(zk, z) / math.Sqrt(dot(zk, zk))
		if c > best {
			best, arg = c, k
		}
	}
	return arg
}

// SkillState returns a view of psi(s, ., z_k), action-major (A rows of d
// values). It must not be modified.
func (ag *Agent) SkillState(k, s int) []float64 {
	i := (k*ag.n + s) * ag.a * ag.d
	return ag.usf[i : i+ag.a*ag.d : i+ag.a*ag.d]
}

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
		dst[a] = dot(psi[a*ag.d:(a+1)*ag.d], w)
	}
}

// Source returns the successor features of skill k as a GPI source (a
// gpi.Viewer reading the table in place).
func (ag *Agent) Source(k int) gpi.Source { return skillSource{ag: ag, k: k} }

type skillSource struct {
	ag *Agent
	k  int
}

func (f skillSource) Shape() (int, int)        { return f.ag.a, f.ag.d }
func (f skillSource) Psi(dst []float64, s int) { copy(dst, f.ag.SkillState(f.k, s)) }
func (f skillSource) State(s int) []float64    { return f.ag.SkillState(f.k, s) }

var _ gpi.Viewer = skillSource{}

func sampleSphere(dst []float64, rng *rand.Rand) {
	for {
		var s float64
		for i := range dst {
			dst[i] = rng.NormFloat64()
			s += dst[i] * dst[i]
		}
		if s > 1e-12 {
			s = 1 / math.Sqrt(s)
			for i := range dst {
				dst[i] *= s
			}
			return
		}
	}
}

// actSkill returns argmax_a psi(s, a, z_k) . z_k, ties broken uniformly at
// random with rng (nil rng: the lowest action).
func (ag *Agent) actSkill(k, s int, rng *rand.Rand) int {
	i := (k*ag.n + s) * ag.a
	return argmaxRand(ag.q[i:i+ag.a], rng)
}

// argmaxRows returns argmax_a rows[a] . w, with random tie-breaking when
// rng is not nil.
func argmaxRows(rows, w []float64, na int, rng *rand.Rand) int {
	d := len(w)
	best, arg, ties := math.Inf(-1), 0, 0
	for a := range na {
		q := dot(rows[a*d:(a+1)*d], w)
		switch {
		case q > best:
			best, arg, ties = q, a, 1
		case q == best && rng != nil:
			ties++
			if rng.IntN(ties) == 0 {
				arg = a
			}
		}
	}
	return arg
}

func dot(x, y []float64) float64 {
	var s float64
	y = y[:len(x)]
	for i, v := range x {
		s += v * y[i]
	}
	return s
}

// newAgent allocates an agent for c (defaults applied) and initialises its
// parameters from the run's generator.
func newAgent(n, na int, c PretrainConfig) (*Agent, error) {
	if n <= 0 || na <= 0 {
		return nil, fmt.Errorf("transfer: environment with %d states and %d actions: %w", n, na, ErrConfig)
	}
	d := c.Dim
	ag := &Agent{cfg: c, n: n, a: na, d: d}
	ag.pcg = rand.NewPCG(c.Seed, streamPretrain)
	ag.rng = rand.New(ag.pcg)
	ag.param = make([]float64, n*d)
	ag.phi = make([]float64, n*d)
	ag.alloc()
	switch c.Method {
	case VMF, Random:
		for s := range n {
			sampleSphere(ag.param[s*d:(s+1)*d], ag.rng)
		}
	case Categorical:
		// Small random logits so that skills are not all alike at the start.
		for i := range ag.param {
			ag.param[i] = 0.01 * ag.rng.NormFloat64()
		}
	case Given:
		for s := range n {
			c.Features.Features(ag.param[s*d:(s+1)*d], s, 0, s)
		}
		for i, v := range ag.param {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("transfer: given feature %d of state %d is %v: %w", i%d, i/d, v, ErrConfig)
			}
		}
	}
	ag.k = c.Skills
	if c.Method == Categorical {
		ag.k = d
	}
	ag.skills = make([]float64, ag.k*d)
	for k := range ag.k {
		if c.Method == Categorical {
			ag.skills[k*d+k] = 1
		} else {
			sampleSphere(ag.skills[k*d:(k+1)*d], ag.rng)
		}
	}
	ag.usf = make([]float64, ag.k*n*na*d)
	ag.q = make([]float64, ag.k*n*na)
	ag.setConstants()
	for s := range n {
		ag.refreshPhi(s)
	}
	ag.replay = newReplay(c.Replay)
	ag.nextProgress = c.ProgressEvery
	if c.CheckpointEvery > 0 {
		ag.nextCheckpoint = c.CheckpointEvery
	}
	return ag, nil
}

func (ag *Agent) alloc() { ag.target = make([]float64, ag.d) }

func (ag *Agent) setConstants() {
	if ag.cfg.Method == VMF {
		ag.logC = skills.VMFLogNorm(ag.d, ag.cfg.Kappa)
	}
	ag.logArea = skills.LogSphereArea(ag.d)
}

// refreshPhi recomputes the cached phi(s) from the parameters.
func (ag *Agent) refreshPhi(s int) {
	d := ag.d
	p := ag.param[s*d : (s+1)*d]
	out := ag.phi[s*d : (s+1)*d]
	switch ag.cfg.Method {
	case VMF:
		nrm := math.Sqrt(dot(p, p))
		for i, v := range p {
			out[i] = v / nrm
		}
	case Categorical:
		logSoftmax(out, p)
	default:
		copy(out, p)
	}
}

func logSoftmax(dst, logits []float64) {
	m := math.Inf(-1)
	for _, v := range logits {
		m = max(m, v)
	}
	var s float64
	for _, v := range logits {
		s += math.Exp(v - m)
	}
	lse := m + math.Log(s)
	for i, v := range logits {
		dst[i] = v - lse
	}
}

// Stream identifiers of the generators derived from one seed.
const (
	streamPretrain = 1 + iota
	streamCollect
	streamAdapt
	streamBaseline
	streamEval
)
