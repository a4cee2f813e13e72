package transfer

import (
	"context"
	"fmt"
	"math"

	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/usf"
)

// Pretrain runs the reward-free phase on env and returns the trained
// agent. It is PretrainContext with context.Background(). A nil cfg means
// the zero PretrainConfig (every default).
func Pretrain(env Env, cfg *PretrainConfig) (*Agent, error) {
	return PretrainContext(context.Background(), env, cfg)
}

// PretrainContext runs the reward-free phase on env until cfg.Steps steps
// or until ctx is done, and returns the agent.
//
// Every episode draws one skill of the skill set uniformly (the set was
// drawn from the prior) and acts epsilon-greedily on
// Q(s, a, z) = psi(s, a, w_z) . w_z; every transition (s, a, s', terminal,
// w_z) goes to the usf.Replay. After each environment step one minibatch of
// cfg.Batch transitions is drawn from the replay, and
//
//   - the discriminator takes one Adam step, dense or sparse
//     (cfg.DiscOptim; skills.VMF or skills.Softmax Update) on the mean of
//     -log q(z | s') over the minibatch (VMF: log q = kappa phi(s').z +
//     log C_d(kappa); Categorical: log q = log softmax(logits(s'))_z;
//     Random and Given learn nothing);
//   - the universal SFs take usf.Tabular.UpdateRelabel on the minibatch,
//     with the current phi(s') of every transition: for the acting skill
//     and cfg.Relabel skills drawn at random, a TD(0) step towards
//     phi(s') + gamma (1 - terminal) psi(s', a*, w),
//     a* = argmax_a psi(s', a, w) . w (the policy of the skill), so that
//     psi(., ., w) . w is the value of the intrinsic reward phi(s') . w
//     (Hansen et al. 2020, Algorithm 1).
//
// Episodes end at a terminal state, at an environment truncation, or after
// cfg.EpisodeSteps steps (a truncation: it bootstraps). The run stops at the
// first episode end at or after cfg.Steps steps. The run is fully determined
// by cfg.Seed.
//
// ctx is checked at every episode end before the last: once it is done,
// the run stops there, saves a checkpoint if cfg.CheckpointPath is set (it
// resumes like any other, see Resume), and returns the agent as it stood
// with an error wrapping ctx.Err() that names the step. The agent is also
// returned, as it stood, with a divergence error.
//
// PretrainContext returns an error wrapping ErrConfig for an invalid
// configuration, ErrDiverged (naming the step) if a value becomes
// non-finite, ctx.Err(), or the error of writing a checkpoint.
func PretrainContext(ctx context.Context, env Env, cfg *PretrainConfig) (*Agent, error) {
	c, err := orZero(cfg).Resolve()
	if err != nil {
		return nil, err
	}
	ag, err := newAgent(env.NumStates(), env.NumActions(), c)
	if err != nil {
		return nil, err
	}
	return ag, ag.train(ctx, env)
}

// Resume loads the checkpoint at path and continues pretraining on env as
// cfg says (Agent.Continue; nil means the zero ResumeConfig); an empty
// cfg.CheckpointPath means path itself. It is ResumeContext with
// context.Background().
func Resume(env Env, path string, cfg *ResumeConfig) (*Agent, error) {
	return ResumeContext(context.Background(), env, path, cfg)
}

// ResumeContext is Resume that stops, as PretrainContext does, at the first
// episode end after ctx is done, saving a checkpoint there.
func ResumeContext(ctx context.Context, env Env, path string, cfg *ResumeConfig) (*Agent, error) {
	ag, err := Load(path)
	if err != nil {
		return nil, err
	}
	c := orZero(cfg)
	if c.CheckpointPath == "" {
		c.CheckpointPath = path
	}
	return ag, ag.Continue(ctx, env, &c)
}

// Continue trains the agent further on env, with its own configuration
// except for the settings of cfg (nil: none), until cfg.Steps steps (0: the Steps of
// its configuration) or until ctx is done (as PretrainContext). Given
// features are not saved: they are fixed by the agent's phi table. A run
// saved at step N and continued to 2N equals, bit for bit, a run of 2N
// steps without interruption. It returns an error wrapping ErrConfig if
// env's sizes differ from the agent's or a setting is negative, and
// otherwise the errors of PretrainContext.
func (ag *Agent) Continue(ctx context.Context, env Env, cfg *ResumeConfig) error {
	if cfg == nil {
		cfg = &ResumeConfig{}
	}
	if ag.n != env.NumStates() || ag.a != env.NumActions() {
		return fmt.Errorf("transfer: resume: checkpoint has %d states and %d actions, environment %d and %d: %w",
			ag.n, ag.a, env.NumStates(), env.NumActions(), ErrConfig)
	}
	if cfg.Steps < 0 || cfg.CheckpointEvery < 0 || cfg.ProgressEvery < 0 {
		return fmt.Errorf("transfer: resume: negative count: %w", ErrConfig)
	}
	c := ag.cfg
	if cfg.Steps != 0 {
		c.Steps = cfg.Steps
	}
	c.CheckpointEvery = cfg.CheckpointEvery
	c.CheckpointPath = cfg.CheckpointPath
	c.Progress = cfg.Progress
	if cfg.ProgressEvery != 0 {
		c.ProgressEvery = cfg.ProgressEvery
	}
	ag.cfg = c
	return ag.train(ctx, env)
}

// maxEmpty is the number of consecutive episodes without a step (a
// terminal start state) after which a loop gives up.
const maxEmpty = 1000

// startDone reports whether env's episode ended at Reset (a terminal start
// state), for environments that can tell (such as *mdp.Sampler).
func startDone(env mdp.Env) bool {
	d, ok := env.(interface{ Done() bool })
	return ok && d.Done()
}

// train runs episodes until ag.cfg.Steps or until ctx is done.
func (ag *Agent) train(ctx context.Context, env Env) error {
	ag.modelMu.Lock()
	ag.emp = nil
	ag.modelMu.Unlock()
	defer ag.tabulatePhi()
	c := &ag.cfg
	eps := c.Epsilon
	tr := &ag.tr
	empty := 0
	for ag.steps < c.Steps {
		k := ag.rng.IntN(ag.k)
		copy(tr.Z, ag.usf.Z[k])
		s := env.Reset(ag.rng)
		took := 0
		for t := 0; t < c.EpisodeSteps && !startDone(env); t++ {
			var a int
			if eps > 0 && ag.rng.Float64() < eps {
				a = ag.rng.IntN(ag.a)
			} else {
				a = ag.actSkill(k, s, ag.rng)
			}
			out := env.Step(a, ag.rng)
			next, term := out.Next, out.Terminal()
			tr.S, tr.A, tr.Next, tr.Terminal = s, a, next, term
			ag.features(tr.Phi, next)
			ag.buf.Add(tr)
			ag.counts[ag.modelKey(s, a, next, term)]++
			ag.steps++
			took++
			if err := ag.update(); err != nil {
				return err
			}
			if out.Done() {
				break
			}
			s = next
		}
		if took == 0 {
			if empty++; empty >= maxEmpty {
				return fmt.Errorf("transfer: pretrain: %d episodes in a row start at a terminal state: %w", empty, ErrConfig)
			}
		} else {
			empty = 0
		}
		ag.episodes++
		if ag.steps >= ag.nextProgress || ag.steps >= c.Steps {
			ag.report()
			for ag.nextProgress <= ag.steps {
				ag.nextProgress += c.ProgressEvery
			}
		}
		if c.CheckpointPath != "" && (c.CheckpointEvery > 0 && ag.steps >= ag.nextCheckpoint || ag.steps >= c.Steps) {
			if c.CheckpointEvery > 0 {
				for ag.nextCheckpoint <= ag.steps {
					ag.nextCheckpoint += c.CheckpointEvery
				}
			}
			if err := ag.Save(c.CheckpointPath); err != nil {
				return err
			}
		}
		if ag.steps < c.Steps {
			if err := ctx.Err(); err != nil {
				// Keep what was done: the state at an episode end
				// continues like any checkpoint.
				if c.CheckpointPath != "" {
					if serr := ag.Save(c.CheckpointPath); serr != nil {
						return serr
					}
				}
				return fmt.Errorf("transfer: pretrain stopped at step %d: %w", ag.steps, err)
			}
		}
	}
	return nil
}

// accum accumulates the statistics of a progress report.
type accum struct {
	n             int
	loss, mi, mi2 float64
}

func (ag *Agent) report() {
	acc, td := ag.acc, ag.td
	ag.acc, ag.td = accum{}, usf.TDStats{}
	if ag.cfg.Progress == nil {
		return
	}
	p := Progress{Steps: ag.steps, Episodes: ag.episodes, TDError: td.Mean()}
	if ag.disc != nil && acc.n > 0 {
		n := float64(acc.n)
		p.HasMI = true
		p.DiscLoss = acc.loss / n
		p.MI = acc.mi / n
		if acc.n > 1 {
			v := (acc.mi2 - n*p.MI*p.MI) / (n - 1)
			p.MIStdErr = math.Sqrt(max(v, 0) / n)
		}
	}
	ag.cfg.Progress(p)
}

// update draws one minibatch from the replay and updates the
// discriminator and the USF.
func (ag *Agent) update() error {
	c := &ag.cfg
	b := ag.smp
	b.K = nil // the replay keeps the task vectors; their indices follow
	ag.buf.Sample(b, ag.rng)
	nb, d, n := b.Len(), ag.d, ag.n
	for i := range nb {
		k := ag.usf.Index(b.Z[i*d : (i+1)*d])
		if k < 0 {
			panic("transfer: replayed skill not in the skill set")
		}
		ag.skillK[i] = k
	}
	b.K = ag.skillK[:nb]

	// One optimiser step of the discriminator on the minibatch of
	// (s', z) pairs of the skills that acted.
	if ag.disc != nil {
		zd := len(ag.zs[0])
		for i := range nb {
			ag.x[i*n+b.Next[i]] = 1
			copy(ag.z[i*zd:(i+1)*zd], ag.zs[b.K[i]])
		}
		loss, err := ag.disc.Update(ag.x, ag.z)
		for i := range nb {
			ag.x[i*n+b.Next[i]] = 0
		}
		if err != nil {
			return fmt.Errorf("transfer: pretrain: discriminator at step %d: %w: %w", ag.steps, ErrDiverged, err)
		}
		// MI lower bound of the minibatch: E[log q(z|s')] - log p(z), the
		// prior's density being the same for every z.
		mi := -loss - ag.prior.LogProb(ag.zs[b.K[0]])
		ag.acc.loss += loss
		ag.acc.mi += mi
		ag.acc.mi2 += mi * mi
		ag.acc.n++
	}

	// TD steps of psi(s, a, w_j) for the acting skill and c.Relabel skills
	// drawn at random, with the current phi (the features stored in the
	// replay date from when the transition was taken).
	for i := range nb {
		ag.features(b.Phi[i*d:(i+1)*d], b.Next[i])
	}
	if err := ag.usf.UpdateRelabel(b, c.relabel(), &ag.td, ag.rng); err != nil {
		return fmt.Errorf("transfer: pretrain: successor features non-finite at step %d: %w: %w", ag.steps, ErrDiverged, err)
	}
	return nil
}
