package transfer

import (
	"fmt"
	"math"
)

// Pretrain runs the reward-free phase on env and returns the trained agent.
//
// Every episode draws a skill z from the prior and acts epsilon-greedily on
// Q(s, a, z) = psi(s, a, z) . z; every transition (s, a, s', terminal, z) goes
// to the replay buffer. After each environment step one minibatch of
// cfg.Batch transitions is drawn from the buffer, and for each of them
//
//   - the discriminator takes a gradient step on -log q(z | s')
//     (VMF: log q = kappa phi(s').z + log C_d(kappa); Categorical:
//     log q = log softmax(logits(s'))_z; Random and Given learn nothing);
//   - the universal SFs take a TD(0) step towards
//     phi(s') + gamma (1 - terminal) psi(s', a*, z),
//     a* = argmax_a psi(s', a, z) . z (the policy of z), with the current
//     phi, so that psi(., ., z) . z is the value of the intrinsic reward
//     phi(s') . z (Hansen et al. 2020, Algorithm 1).
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
	if ag.n != env.NumStates() || ag.a != env.NumActions() {
		return nil, fmt.Errorf("transfer: resume: checkpoint has %d states and %d actions, environment %d and %d: %w",
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
	if c.Steps < 0 || c.CheckpointEvery < 0 || c.ProgressEvery < 0 {
		return nil, fmt.Errorf("transfer: resume: negative count: %w", ErrConfig)
	}
	ag.cfg = c
	return ag, ag.train(env)
}

// train runs episodes until ag.cfg.Steps.
func (ag *Agent) train(env Env) error {
	ag.modelMu.Lock()
	ag.emp = nil
	ag.modelMu.Unlock()
	c := &ag.cfg
	eps := c.Epsilon
	for ag.steps < c.Steps {
		k := ag.rng.IntN(ag.k)
		s := env.Reset(ag.rng)
		for t := 0; t < c.EpisodeSteps; t++ {
			var a int
			if eps > 0 && ag.rng.Float64() < eps {
				a = ag.rng.IntN(ag.a)
			} else {
				a = ag.actSkill(k, s, ag.rng)
			}
			next, term, trunc := env.Step(a, ag.rng)
			ag.replay.add(s, a, next, term, k)
			ag.steps++
			if err := ag.update(); err != nil {
				return err
			}
			if term || trunc {
				break
			}
			s = next
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
	if (ag.cfg.Method == VMF || ag.cfg.Method == Categorical) && acc.n > 0 {
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

// update draws one minibatch and updates the discriminator and the USF.
func (ag *Agent) update() error {
	c := &ag.cfg
	rb := &ag.replay
	for range c.Batch {
		i := rb.sample(ag.rng)
		s, a, next, term, k := int(rb.s[i]), int(rb.a[i]), int(rb.next[i]), rb.term[i], int(rb.k[i])

		// Discriminator step on (s', z_k) with the skill that acted.
		switch c.Method {
		case VMF:
			ag.stepVMF(next, ag.Skill(k))
		case Categorical:
			ag.stepCategorical(next, k)
		}

		// TD steps of psi(s, a, z_j) for the acting skill and c.Relabel
		// skills drawn at random (off-policy relabelling: the intrinsic
		// reward phi(s') . z_j is known for every j).
		for r := 0; r <= c.Relabel; r++ {
			j := k
			if r > 0 {
				j = ag.rng.IntN(ag.k)
			}
			if err := ag.tdStep(j, s, a, next, term); err != nil {
				return err
			}
		}
	}
	return nil
}

// tdStep moves psi(s, a, z_j) towards phi(s') + gamma psi(s', a*, z_j), with
// a* = argmax_a psi(s', a, z_j) . z_j (no bootstrap from a terminal s').
func (ag *Agent) tdStep(j, s, a, next int, term bool) error {
	d, na := ag.d, ag.a
	tgt := ag.target
	copy(tgt, ag.phi[next*d:(next+1)*d])
	if !term {
		qi := (j*ag.n + next) * na
		b := argmaxRand(ag.q[qi:qi+na], nil)
		off := ((j*ag.n+next)*na + b) * d
		g := ag.cfg.Gamma
		for i, v := range ag.usf[off : off+d : off+d] {
			tgt[i] += g * v
		}
	}
	row := (j*ag.n+s)*na + a
	p := ag.usf[row*d : (row+1)*d : (row+1)*d]
	z := ag.skills[j*d : (j+1)*d : (j+1)*d]
	lr := ag.cfg.LearnRate
	var sq, dq float64
	for i, v := range tgt {
		delta := v - p[i]
		sq += delta * delta
		step := lr * delta
		p[i] += step
		dq += step * z[i]
	}
	ag.q[row] += dq
	if math.IsNaN(sq) || math.IsInf(sq, 0) {
		return fmt.Errorf("transfer: pretrain: successor features non-finite at step %d: %w", ag.steps, ErrDiverged)
	}
	ag.acc.td += sq / float64(d)
	ag.acc.nTD++
	return nil
}

// stepVMF takes a gradient step on -log q(z|s) = -(kappa phi(s).z + log C)
// with phi = f/||f||: the gradient in f is -kappa (z - (phi.z) phi)/||f||.
func (ag *Agent) stepVMF(s int, z []float64) {
	d := ag.d
	f := ag.param[s*d : (s+1)*d]
	phi := ag.phi[s*d : (s+1)*d]
	c := dot(phi, z)
	lq := ag.cfg.Kappa*c + ag.logC
	ag.acc.loss -= lq
	mi := lq + ag.logArea
	ag.acc.mi += mi
	ag.acc.mi2 += mi * mi
	ag.acc.n++
	nrm := math.Sqrt(dot(f, f))
	g := ag.cfg.DiscRate * ag.cfg.Kappa / nrm
	for i := range f {
		f[i] += g * (z[i] - c*phi[i])
	}
	ag.refreshPhi(s)
}

// stepCategorical takes a gradient step on the cross-entropy -log q(z|s):
// logits += rate (onehot(z) - q).
func (ag *Agent) stepCategorical(s, k int) {
	d := ag.d
	l := ag.param[s*d : (s+1)*d]
	phi := ag.phi[s*d : (s+1)*d] // log q(. | s)
	lq := phi[k]
	ag.acc.loss -= lq
	mi := lq + math.Log(float64(d))
	ag.acc.mi += mi
	ag.acc.mi2 += mi * mi
	ag.acc.n++
	r := ag.cfg.DiscRate
	for i := range l {
		q := math.Exp(phi[i])
		if i == k {
			l[i] += r * (1 - q)
		} else {
			l[i] -= r * q
		}
	}
	ag.refreshPhi(s)
}
