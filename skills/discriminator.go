package skills

import (
	"fmt"
	"math/rand/v2"

	"github.com/successor-go/successor/internal/nn"
)

// Discriminator is a learned model q(z | x) of the skill z given an
// observation x, arranged so that log q(z | x) is linear in z:
//
//	log q(z | x) = Features(x) . TaskVector(z) + (a term free of x)
//
// and the intrinsic reward of reaching observation x under skill z is
// Reward(x, z) = Features(x) . TaskVector(z). With those features as
// phi(s, a, s') = Features(obs(s')) and task vector w = TaskVector(z), the
// successor features of the policy of skill z evaluate the skill's own
// intrinsic return. VMF and Softmax implement it.
//
// Methods are not safe for concurrent use: they share scratch buffers.
type Discriminator interface {
	// InDim returns the length of an observation x.
	InDim() int
	// ZDim returns the length of a skill vector z.
	ZDim() int
	// FeatureDim returns the length of Features(x) and TaskVector(z).
	FeatureDim() int
	// Features writes phi(x) into dst (len FeatureDim). It panics if a
	// length is wrong.
	Features(dst, x []float64)
	// LogProb returns log q(z | x). It panics if a length is wrong.
	LogProb(x, z []float64) float64
	// Reward returns the intrinsic reward Features(x) . TaskVector(z) for
	// arriving at observation x under skill z. It panics if a length is
	// wrong.
	Reward(x, z []float64) float64
	// TaskVector writes the weight vector w of skill z into dst (len
	// FeatureDim), so that Reward(x, z) = Features(x) . w. It panics if a
	// length is wrong.
	TaskVector(dst, z []float64)
	// Update takes one optimiser step on the mean negative log-likelihood
	// -(1/n) sum_i log q(z_i | x_i) of a minibatch of n pairs, given as x
	// (n rows of InDim, row-major) and z (n rows of ZDim), and returns the
	// loss before the step. It returns a *DivergenceError, and leaves the
	// weights unchanged, if the loss or the gradient is not finite. It
	// panics if the lengths do not describe n >= 1 pairs.
	Update(x, z []float64) (loss float64, err error)
}

// Classifier is implemented by discriminators over one-hot skills that can
// name the most likely skill (Softmax).
type Classifier interface {
	// Predict returns argmax_k q(e_k | x).
	Predict(x []float64) int
}

// NetConfig describes the map f inside a discriminator: the vMF direction f(x)
// or the categorical logits.
type NetConfig struct {
	// Hidden are the widths of the hidden layers. Empty means a linear map
	// f(x) = x W + b (tabular when x is one-hot); otherwise f is a
	// multilayer perceptron from the internal nn package.
	Hidden []int
	// Tanh selects tanh hidden units; false means ReLU.
	Tanh bool
	// MaxBatch is the number of rows a neural f processes at once; larger
	// minibatches are split and their gradients summed, so it changes
	// speed, not results beyond rounding. 0 means 64. Ignored when f is
	// linear.
	MaxBatch int
}

const maxHiddenLayers = 16

func (n *NetConfig) check() error {
	if len(n.Hidden) > maxHiddenLayers {
		return fmt.Errorf("%d hidden layers, at most %d: %w", len(n.Hidden), maxHiddenLayers, ErrConfig)
	}
	var sum int
	for _, h := range n.Hidden {
		if h < 1 || h > maxWidth {
			return fmt.Errorf("hidden width %d not in 1..%d: %w", h, maxWidth, ErrConfig)
		}
		sum += h
	}
	if n.MaxBatch < 0 || n.MaxBatch > maxRowsNet {
		return fmt.Errorf("max batch %d not in 0..%d: %w", n.MaxBatch, maxRowsNet, ErrConfig)
	}
	mb := n.MaxBatch
	if mb == 0 {
		mb = 64
	}
	if mb*sum > maxActivations {
		return fmt.Errorf("max batch %d x hidden units %d above %d: %w", mb, sum, maxActivations, ErrConfig)
	}
	return nil
}

// Limits that keep a neural f, and the loaders, from allocating without
// bound: rows per chunk and stored hidden activations (rows x units).
const (
	maxRowsNet     = 4096
	maxActivations = 1 << 24
)

// maxWidth bounds every size (observation length, skill dimension, hidden
// width), so that loaders never allocate without bound.
const maxWidth = 1 << 14

func newEncoder(in, out int, net *NetConfig, rng *rand.Rand) (encoder, error) {
	if len(net.Hidden) == 0 {
		return newLinear(in, out, rng), nil
	}
	return newNeural(in, out, net, rng)
}

// core is the training loop shared by the discriminators.
type core struct {
	enc   encoder
	opt   OptimConfig
	adam  *nn.Adam
	steps int
	dy    []float64 // dLoss/df for one chunk
	acc   []float64 // summed gradient when a minibatch spans chunks
}

// chunkLosser computes, for the m rows y = f(x) of one chunk and their
// skills z, the sum of the per-row losses, and writes dLoss/dy into dy,
// scaling every row by inv = 1/n for a minibatch of n rows.
type chunkLosser interface {
	chunkLoss(dy, y, z []float64, m int, inv float64) float64
}

func newCore(enc encoder, opt OptimConfig) core {
	return core{enc: enc, opt: opt, adam: newAdam(len(enc.params()), &opt)}
}

// rows checks the lengths of a minibatch and returns its row count.
func (c *core) rows(x, z []float64, zdim int, who string) int {
	in := c.enc.inDim()
	n := len(x) / in
	if n < 1 || len(x) != n*in || len(z) != n*zdim {
		panic(fmt.Sprintf("skills: %s update: len(x) = %d, len(z) = %d: not n >= 1 rows of %d and %d", who, len(x), len(z), in, zdim))
	}
	return n
}

// lossGrad returns the mean loss of the n pairs and its gradient with
// respect to the encoder's parameters.
func (c *core) lossGrad(l chunkLosser, x, z []float64, n, zdim int) (float64, []float64) {
	in, out := c.enc.inDim(), c.enc.outDim()
	rows := c.enc.maxRows()
	inv := 1 / float64(n)
	single := n <= rows
	if !single {
		if len(c.acc) != len(c.enc.params()) {
			c.acc = make([]float64, len(c.enc.params()))
		}
		clear(c.acc)
	}
	var loss float64
	for i0 := 0; i0 < n; i0 += rows {
		m := min(rows, n-i0)
		y := c.enc.forward(x[i0*in:(i0+m)*in], m)
		if cap(c.dy) < m*out {
			c.dy = make([]float64, m*out)
		}
		dy := c.dy[:m*out]
		loss += l.chunkLoss(dy, y, z[i0*zdim:(i0+m)*zdim], m, inv)
		c.enc.backward(dy)
		if !single {
			for i, g := range c.enc.grad() {
				c.acc[i] += g
			}
		}
	}
	if single {
		return loss * inv, c.enc.grad()
	}
	return loss * inv, c.acc
}

// step clips g and takes one Adam step, dense or sparse, or reports
// divergence. The sparse step needs a linear encoder and g its own
// gradient, which the configuration checks guarantee.
func (c *core) step(loss float64, g []float64) error {
	c.steps++
	if c.opt.Method == OptimSparseAdam {
		e := c.enc.(*linear)
		norm := sparseClipNorm(g, e.rows, e.out, c.opt.ClipNorm)
		if !isFinite(loss) || !isFinite(norm) {
			return &DivergenceError{Step: c.steps, Loss: loss}
		}
		sparseAdamStep(c.adam, e.p, g, e.rows, e.out)
		return nil
	}
	norm := nn.ClipNorm(g, c.opt.ClipNorm)
	if !isFinite(loss) || !isFinite(norm) {
		return &DivergenceError{Step: c.steps, Loss: loss}
	}
	c.adam.Step(c.enc.params(), g)
	return nil
}

func (c *core) clone() core {
	return core{enc: c.enc.clone(), opt: c.opt, adam: c.adam.Clone(), steps: c.steps}
}
