package usf

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/successor-go/successor/internal/nn"
	"github.com/successor-go/successor/sf"
)

// NeuralConfig configures a Neural approximator. A nil *NeuralConfig means
// the zero value, whose fields mean the documented defaults.
type NeuralConfig struct {
	// Hidden are the hidden layer widths. Nil means {128, 128}.
	Hidden []int
	// Tanh selects tanh hidden units instead of ReLU.
	Tanh bool
	// MaxBatch is the largest batch Update accepts. 0 means 64.
	MaxBatch int
	// StepSize is the Adam step size (Kingma & Ba 2015, Algorithm 1, with
	// beta1 0.9, beta2 0.999, eps 1e-8). 0 means 1e-3.
	StepSize float64
	// Clip is the bound on the global gradient norm. 0 means 10; a
	// negative value disables clipping.
	Clip float64
	// TargetEvery is the number of updates between hard copies of the
	// online network into the target network. 0 means 100. Ignored when
	// Tau > 0.
	TargetEvery int
	// Tau > 0 selects Polyak averaging instead: after every update,
	// target = (1 - Tau) target + Tau online. Tau must be at most 1.
	Tau float64
	// OnlineSelect chooses the greedy next action a' with the online
	// network and evaluates psi(s', a', z) with the target network (the
	// double estimator of van Hasselt, Guez and Silver 2016, "Deep
	// reinforcement learning with double Q-learning", eq. 4), which
	// reduces the upward bias of the max. It costs one more forward pass.
	// False selects a' with the target network.
	OnlineSelect bool
}

// Neural is a universal SF given by a multilayer perceptron on the
// concatenation (x, z), with A*d outputs (output a*d + k is psi_k(s, a, z)),
// trained by minibatch semi-gradient TD(0) with a target network, Adam and
// gradient-norm clipping (see the package doc). A Neural is not safe for
// concurrent use, even for Psi, which runs the network.
type Neural struct {
	net, target *nn.MLP
	opt         *nn.Adam

	obs, na, d  int
	gamma       float64
	clip        float64
	targetEvery int
	tau         float64
	online      bool // OnlineSelect
	updates     int
	err         error

	in, inNext []float64 // MaxBatch*(obs+d)
	tgt        []float64 // MaxBatch*d
	dy         []float64 // MaxBatch*A*d
	choice     []int     // MaxBatch next actions chosen by the online network
}

// NewNeural returns a neural USF for observations of dimension obs, the
// given number of actions and features of dimension dim, with discount
// gamma in [0, 1], weights drawn from rng. The target network starts as a
// copy of the online network. Errors wrap ErrDimension, ErrDiscount or
// ErrConfig.
func NewNeural(obs, actions, dim int, gamma float64, cfg *NeuralConfig, rng *rand.Rand) (*Neural, error) {
	if err := checkGamma("neural", gamma); err != nil {
		return nil, err
	}
	if obs <= 0 || actions <= 0 || dim <= 0 {
		return nil, fmt.Errorf("usf: neural: sizes %d, %d, %d must be positive: %w", obs, actions, dim, ErrDimension)
	}
	var c NeuralConfig
	if cfg != nil {
		c = *cfg
	}
	if c.Hidden == nil {
		c.Hidden = []int{128, 128}
	}
	if c.MaxBatch == 0 {
		c.MaxBatch = 64
	}
	if c.StepSize == 0 {
		c.StepSize = 1e-3
	}
	if c.Clip == 0 {
		c.Clip = 10
	}
	if c.TargetEvery == 0 {
		c.TargetEvery = 100
	}
	if !(c.StepSize > 0) || c.TargetEvery < 0 || !(c.Tau >= 0 && c.Tau <= 1) || math.IsNaN(c.Clip) || math.IsInf(c.StepSize, 0) {
		return nil, fmt.Errorf("usf: neural: config %+v: %w", c, ErrConfig)
	}
	if rng == nil {
		return nil, fmt.Errorf("usf: neural: nil rng: %w", ErrConfig)
	}
	sizes := append([]int{obs + dim}, c.Hidden...)
	sizes = append(sizes, actions*dim)
	acts := make([]nn.Activation, len(sizes)-1)
	for i := range acts {
		acts[i] = nn.ReLU
		if c.Tanh {
			acts[i] = nn.Tanh
		}
	}
	acts[len(acts)-1] = nn.Identity
	net, err := nn.New(&nn.Config{Sizes: sizes, Acts: acts, MaxBatch: c.MaxBatch}, rng)
	if err != nil {
		return nil, fmt.Errorf("usf: neural: %v: %w", err, ErrConfig)
	}
	u := &Neural{
		net:         net,
		target:      net.Clone(),
		opt:         nn.NewAdam(net.NumParams(), &nn.AdamConfig{StepSize: c.StepSize}),
		obs:         obs,
		na:          actions,
		d:           dim,
		gamma:       gamma,
		clip:        c.Clip,
		targetEvery: c.TargetEvery,
		tau:         c.Tau,
		online:      c.OnlineSelect,
	}
	u.alloc()
	return u, nil
}

// alloc sizes the scratch buffers from the network.
func (u *Neural) alloc() {
	mb := u.net.MaxBatch()
	u.in = make([]float64, mb*(u.obs+u.d))
	u.inNext = make([]float64, mb*(u.obs+u.d))
	u.tgt = make([]float64, mb*u.d)
	u.dy = make([]float64, mb*u.na*u.d)
	u.choice = make([]int, mb)
}

// ObsDim returns the observation dimension.
func (u *Neural) ObsDim() int { return u.obs }

// Shape returns the number of actions and the feature dimension, the shape
// of psi(x, ., z).
func (u *Neural) Shape() (actions, dim int) { return u.na, u.d }

// MaxBatch returns the largest batch Update accepts.
func (u *Neural) MaxBatch() int { return u.net.MaxBatch() }

// Updates returns the number of minibatch updates made.
func (u *Neural) Updates() int { return u.updates }

// NumParams returns the number of network parameters.
func (u *Neural) NumParams() int { return u.net.NumParams() }

// StepSize returns the current Adam step size.
func (u *Neural) StepSize() float64 { return u.opt.StepSize }

// SetStepSize sets the Adam step size, for annealing it between updates. It
// panics unless lr > 0 and finite.
func (u *Neural) SetStepSize(lr float64) {
	if !(lr > 0) || math.IsInf(lr, 0) {
		panic("usf: neural: step size must be positive and finite")
	}
	u.opt.StepSize = lr
}

// Err returns the divergence error of an earlier update, or nil.
func (u *Neural) Err() error { return u.err }

// Psi writes psi(s, ., z) for observation x into dst (action-major) from
// the online network. It panics if a length is wrong. It does not
// allocate.
func (u *Neural) Psi(dst, x, z []float64) { u.psi(u.net, u.in, dst, x, z) }

// PsiTarget is Psi from the target network.
func (u *Neural) PsiTarget(dst, x, z []float64) { u.psi(u.target, u.inNext, dst, x, z) }

// psi evaluates net on the input row [x, z], built in the scratch in.
func (u *Neural) psi(net *nn.MLP, in, dst, x, z []float64) {
	checkLen("neural", "psi slice", dst, u.na*u.d)
	checkLen("neural", "observation", x, u.obs)
	checkLen("neural", "z", z, u.d)
	row := in[:u.obs+u.d]
	copy(row, x)
	copy(row[u.obs:], z)
	copy(dst, net.Forward(row, 1))
}

// inputs writes the rows (x_i, z_i) of b into dst, from X (next = false)
// or NextX (next = true), or one-hot from S or Next when X is nil.
func (u *Neural) inputs(dst []float64, b *Batch, next bool) {
	n, w := b.Len(), u.obs+u.d
	for i := 0; i < n; i++ {
		row := dst[i*w : (i+1)*w]
		switch {
		case b.X != nil && !next:
			copy(row, b.X[i*u.obs:(i+1)*u.obs])
		case b.X != nil:
			copy(row, b.NextX[i*u.obs:(i+1)*u.obs])
		default:
			s := b.S[i]
			if next {
				s = b.Next[i]
			}
			if uint(s) >= uint(u.obs) {
				panic(fmt.Sprintf("usf: neural: state %d out of range of one-hot observations [0, %d)", s, u.obs))
			}
			clear(row[:u.obs])
			row[s] = 1
		}
		copy(row[u.obs:], b.Z[i*u.d:(i+1)*u.d])
	}
}

// Update makes one minibatch semi-gradient TD(0) step on b (1 <= n <=
// MaxBatch transitions): targets phi + gamma (1-terminal) psi_target(s',
// a', z), with a' the given next action or greedy in psi_target(s', ., z) . z
// (in the online psi(s', ., z) . z with OnlineSelect); the loss
// (1/(2n)) sum_i ||psi(s_i, a_i, z_i) - y_i||^2; backpropagation,
// gradient-norm clipping and one Adam step; then the target update (a hard
// copy every TargetEvery updates, or Polyak with Tau). It reads X and NextX
// if set, else one-hot observations of S and Next. It returns the loss
// before the step, or a *sf.DivergenceError if the loss or the gradient is
// not finite (the parameters are then left unchanged by this update). It
// panics if b is malformed or larger than MaxBatch. It does not allocate.
func (u *Neural) Update(b *Batch) (float64, error) {
	if u.err != nil {
		return 0, u.err
	}
	n := b.Len()
	if n < 1 || n > u.net.MaxBatch() {
		panic(fmt.Sprintf("usf: neural: batch of %d, want 1..%d", n, u.net.MaxBatch()))
	}
	b.check("neural", u.obs, u.na, u.d, false)
	w, d, ad := u.obs+u.d, u.d, u.na*u.d

	u.inputs(u.inNext[:n*w], b, true)
	if u.online {
		yo := u.net.Forward(u.inNext[:n*w], n)
		for i := 0; i < n; i++ {
			u.choice[i] = greedy(yo[i*ad:(i+1)*ad], b.Z[i*d:(i+1)*d], u.na)
		}
	}
	yn := u.target.Forward(u.inNext[:n*w], n)
	for i := 0; i < n; i++ {
		t := u.tgt[i*d : (i+1)*d]
		copy(t, b.Phi[i*d:(i+1)*d])
		if b.Terminal[i] {
			continue
		}
		psi := yn[i*ad : (i+1)*ad]
		an := b.nextAction(i)
		if an < 0 && u.online {
			an = u.choice[i]
		} else if an < 0 {
			an = greedy(psi, b.Z[i*d:(i+1)*d], u.na)
		}
		for k, v := range psi[an*d : (an+1)*d] {
			t[k] += u.gamma * v
		}
	}

	u.inputs(u.in[:n*w], b, false)
	y := u.net.Forward(u.in[:n*w], n)
	dy := u.dy[:n*ad]
	clear(dy)
	inv := 1 / float64(n)
	var loss float64
	for i := 0; i < n; i++ {
		off := i*ad + b.A[i]*d
		for k, t := range u.tgt[i*d : (i+1)*d] {
			e := y[off+k] - t
			loss += e * e
			dy[off+k] = e * inv
		}
	}
	loss *= inv / 2
	u.updates++
	if math.IsNaN(loss) || math.IsInf(loss, 0) {
		u.err = &sf.DivergenceError{Learner: "usf neural", Step: u.updates, State: -1, Action: -1}
		return 0, u.err
	}
	u.net.Backward(nil, dy)
	g := u.net.Grad()
	norm := nn.ClipNorm(g, u.clip)
	if math.IsNaN(norm) || math.IsInf(norm, 0) {
		u.err = &sf.DivergenceError{Learner: "usf neural", Step: u.updates, State: -1, Action: -1}
		return 0, u.err
	}
	u.opt.Step(u.net.Params(), g)
	if u.tau > 0 {
		u.target.Blend(u.net, u.tau)
	} else if u.updates%u.targetEvery == 0 {
		u.target.CopyFrom(u.net)
	}
	return loss, nil
}
