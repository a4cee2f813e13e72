package transfer

import (
	"fmt"
	"math"

	"github.com/successor-go/successor/mdp"
)

// Pretrain runs the reward-free phase on env and returns the trained agent.
//
// Every episode draws one skill of the skill set uniformly (the set was
// drawn from the prior) and acts epsilon-greedily on
// Q(s, a, z) = psi(s, a, w_z) . w_z; every transition (s, a, s', terminal,
// w_z) goes to the usf.Replay. After each environment step one minibatch of
// cfg.Batch transitions is drawn from the replay, and
//
//   - the discriminator takes one Adam step, dense or sparse
//     (cfg.DiscOptim; skills.VMF or skills.Softmax Update) on the mean of -log q(z | s') over the minibatch (VMF:
//     log q = kappa phi(s').z + log C_d(kappa); Categorical:
//     log q = log softmax(logits(s'))_z; Random and Given learn nothing);
//   - for every transition of the minibatch, the universal SFs of the
//     acting skill and of cfg.Relabel skills drawn at random take a TD(0)
//     step (sf.TD) towards
//     phi(s') + gamma (1 - terminal) psi(s', a*, w),
//     a* = argmax_a psi(s', a, w) . w (the policy of the skill), with the
//     current phi, so that psi(., ., w) . w is the value of the intrinsic
//     reward phi(s') . w (Hansen et al. 2020, Algorithm 1).
//
// Episodes end at a terminal state, at an environment truncation, or after
// cfg.EpisodeSteps steps (a truncation: it bootstraps). The run stops at the
// first episode end at or after cfg.Steps steps. The run is fully determined
// by cfg.Seed.
//
// Pretrain returns an error wrapping ErrConfig for an invalid configuration,
// ErrDiverged (naming the step) if a value becomes non-finite, or the error
// of writing a checkpoint.
func Pretrain(env Env, cfg PretrainConfig) (*Agent, error) {
	c, err := cfg.withDefaults()
	if err != nil {
		return nil, err
	}
	ag, err := newAgent(env.NumStates(), env.NumActions(), c)
	if err != nil {
		return nil, err
	}
	return ag, ag.train(env)
}

// Resume loads the checkpoint at path and continues pretraining on env until
// cfg.Steps steps, with the configuration saved in the checkpoint except for
// Steps, CheckpointEvery, CheckpointPath, ProgressEvery and Progress, which
// are taken from cfg (a zero CheckpointPath means path itself; the others
// keep their defaults). Given features are not saved (they are fixed by the
// checkpoint's phi table). A run saved at step N and resumed to 2N equals,
// bit for bit, a run of 2N steps without interruption.
func Resume(env Env, path string, cfg PretrainConfig) (*Agent, error) {
	ag, err := Load(path)
	if err != nil {
		return nil, err
	}
	return ag, ag.resume(env, path, cfg)
}

// resume continues the loaded agent ag as Resume describes.
func (ag *Agent) resume(env Env, path string, cfg PretrainConfig) error {
	if ag.n != env.NumStates() || ag.a != env.NumActions() {
		return fmt.Errorf("transfer: resume: checkpoint has %d states and %d actions, environment %d and %d: %w",
			ag.n, ag.a, env.NumStates(), env.NumActions(), ErrConfig)
	}
	c := ag.cfg
	c.Steps = cfg.Steps
	if c.Steps == 0 {
		c.Steps = 100000
	}
	c.CheckpointEvery = cfg.CheckpointEvery
	c.CheckpointPath = cfg.CheckpointPath
	if c.CheckpointPath == "" {
		c.CheckpointPath = path
	}
	c.Progress = cfg.Progress
	if cfg.ProgressEvery != 0 {
		c.ProgressEvery = cfg.ProgressEvery
	}
	c.stop = cfg.stop
	if c.Steps < 0 || c.CheckpointEvery < 0 || c.ProgressEvery < 0 {
		return fmt.Errorf("transfer: resume: negative count: %w", ErrConfig)
	}
	ag.cfg = c
	return ag.train(env)
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

// train runs episodes until ag.cfg.Steps.
func (ag *Agent) train(env Env) error {
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
			next, term, trunc := env.Step(a, ag.rng)
			tr.S, tr.A, tr.Next, tr.Terminal = s, a, next, term
			ag.features(tr.Phi, next)
			ag.buf.Add(tr)
			ag.counts[ag.modelKey(s, a, next, term)]++
			ag.steps++
			took++
			if err := ag.update(); err != nil {
				return err
			}
			if term || trunc {
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
		if c.stop != nil && ag.steps < c.Steps {
			if err := c.stop(); err != nil {
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
	n, nTD            int
	loss, mi, mi2, td float64
}

func (ag *Agent) report() {
	acc := ag.acc
	ag.acc = accum{}
	if ag.cfg.Progress == nil {
		return
	}
	p := Progress{Steps: ag.steps, Episodes: ag.episodes}
	if acc.nTD > 0 {
		p.TDError = acc.td / float64(acc.nTD)
	}
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
	ag.buf.Sample(b, ag.rng)
	nb, d, n := b.Len(), ag.d, ag.n
	for i := range nb {
		k := ag.skillOf(b.Z[i*d : (i+1)*d])
		if k < 0 {
			panic("transfer: replayed skill not in the skill set")
		}
		ag.skillK[i] = k
	}

	// One optimiser step of the discriminator on the minibatch of
	// (s', z) pairs of the skills that acted.
	if ag.disc != nil {
		zd := len(ag.zs[0])
		for i := range nb {
			ag.x[i*n+b.Next[i]] = 1
			copy(ag.z[i*zd:(i+1)*zd], ag.zs[ag.skillK[i]])
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
		mi := -loss - ag.prior.LogProb(ag.zs[ag.skillK[0]])
		ag.acc.loss += loss
		ag.acc.mi += mi
		ag.acc.mi2 += mi * mi
		ag.acc.n++
	}

	// TD steps of psi(s, a, w_j) for the acting skill and c.Relabel skills
	// drawn at random (off-policy relabelling: the intrinsic reward
	// phi(s') . w_j is known for every j), with the current phi: the sf.TD
	// learner of skill j on skill j's table of the usf.Tabular, bootstrapping
	// from the greedy action of w_j in s' (read from the cached values
	// Q(s, a, w_j), so it costs A rather than A d operations; sf.TD's own
	// Greedy target computes the same action from the table). The squared TD
	// error is recovered from the change of the row,
	// ||delta||^2 = ||change||^2 / alpha^2.
	old := ag.rowBuf
	inv := 1 / (c.LearnRate * c.LearnRate)
	for i := range nb {
		ag.features(ag.phiBuf, b.Next[i])
		s, a, next, term := b.S[i], b.A[i], b.Next[i], b.Terminal[i]
		for j := 0; j <= c.Relabel; j++ {
			kk := ag.skillK[i]
			if j > 0 {
				kk = ag.rng.IntN(ag.k)
			}
			row := ag.usf.Tables[kk].Row(s, a)
			copy(old, row)
			an := -1
			if !term {
				an = ag.greedy(kk, next)
			}
			if err := ag.tds[kk].UpdateFeatures(s, a, ag.phiBuf, next, term, an); err != nil {
				return fmt.Errorf("transfer: pretrain: successor features of skill %d non-finite at step %d: %w: %w", kk, ag.steps, ErrDiverged, err)
			}
			ag.q[(kk*ag.n+s)*ag.a+a] = dot(row, ag.usf.Z[kk])
			var sq float64
			for m, v := range row {
				e := v - old[m]
				sq += e * e
			}
			ag.acc.td += sq * inv / float64(d)
			ag.acc.nTD++
		}
	}
	return nil
}
