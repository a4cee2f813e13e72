package skills

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/successor-go/successor/internal/vec"
)

// SoftmaxConfig configures a categorical discriminator. Zero fields other
// than In and K mean the defaults.
type SoftmaxConfig struct {
	// In is the length of an observation x (required, >= 1).
	In int
	// K is the number of skills (required, >= 2); skills are one-hot z.
	K int
	// Net describes the logits; the zero value is linear.
	Net NetConfig
	// Optim sets the optimiser.
	Optim OptimConfig
}

// Softmax is the categorical discriminator over K one-hot skills
//
//	q(. | x) = softmax(l(x)),
//
// with logits l linear or neural. Its features have K+1 entries,
//
//	phi(x) = (log q(0 | x), ..., log q(K-1 | x), log K),
//
// and the task vector of skill z = e_k is w = (z, 1) = (e_k, 1), so that
//
//	phi(x) . w = log q(k | x) + log K = log q(z | x) - log p(z),
//
// the pseudo-reward of Eysenbach et al. (2019, Diversity is All You Need,
// eq. 3) under the uniform prior p(z) = 1/K: the constant last feature
// carries log K. It is 0 when q cannot tell the skills apart (q = 1/K) and
// log K when it is certain and right.
type Softmax struct {
	core
	k    int
	logK float64
	net  NetConfig
	lq   []float64 // log q(. | x) scratch, len K
}

var (
	_ Discriminator = (*Softmax)(nil)
	_ Classifier    = (*Softmax)(nil)
	_ chunkLosser   = (*Softmax)(nil)
)

// NewSoftmax returns a categorical discriminator with weights drawn from
// rng. It returns an error wrapping ErrConfig if cfg is nil, a size is out
// of range or rng is nil.
func NewSoftmax(cfg *SoftmaxConfig, rng *rand.Rand) (*Softmax, error) {
	if cfg == nil || rng == nil {
		return nil, fmt.Errorf("skills: new softmax: nil config or rng: %w", ErrConfig)
	}
	c := *cfg
	c.Net.Hidden = append([]int(nil), cfg.Net.Hidden...)
	var err error
	if c.Optim, err = c.Optim.resolve(); err != nil {
		return nil, fmt.Errorf("skills: new softmax: %w", err)
	}
	d, err := buildSoftmax(&c, rng)
	if err != nil {
		return nil, fmt.Errorf("skills: new softmax: %w", err)
	}
	return d, nil
}

// buildSoftmax checks c, whose defaults are already filled in, and returns
// a discriminator with weights drawn from rng.
func buildSoftmax(c *SoftmaxConfig, rng *rand.Rand) (*Softmax, error) {
	if err := c.Optim.check(); err != nil {
		return nil, err
	}
	if err := c.Optim.checkNet(&c.Net); err != nil {
		return nil, err
	}
	if err := c.check(); err != nil {
		return nil, err
	}
	enc, err := newEncoder(c.In, c.K, &c.Net, rng)
	if err != nil {
		return nil, err
	}
	return newSoftmax(enc, c.Optim, c.Net), nil
}

func newSoftmax(enc encoder, opt OptimConfig, net NetConfig) *Softmax {
	k := enc.outDim()
	return &Softmax{core: newCore(enc, opt), k: k, logK: math.Log(float64(k)), net: net, lq: make([]float64, k)}
}

func (c *SoftmaxConfig) check() error {
	switch {
	case c.In < 1 || c.In > maxWidth:
		return fmt.Errorf("observation length %d not in 1..%d: %w", c.In, maxWidth, ErrConfig)
	case c.K < 2 || c.K > maxWidth:
		return fmt.Errorf("skill count %d not in 2..%d: %w", c.K, maxWidth, ErrConfig)
	}
	return c.Net.check()
}

// InDim returns the length of an observation.
func (c *Softmax) InDim() int { return c.enc.inDim() }

// ZDim returns K.
func (c *Softmax) ZDim() int { return c.k }

// FeatureDim returns K+1.
func (c *Softmax) FeatureDim() int { return c.k + 1 }

// Steps returns the number of updates taken.
func (c *Softmax) Steps() int { return c.steps }

// Optim returns the optimiser settings, defaults filled in.
func (c *Softmax) Optim() OptimConfig { return c.opt }

// logSoftmax writes log softmax(l) into dst and returns the index of the
// largest logit (the first one on ties).
func logSoftmax(dst, l []float64) int {
	best := vec.Argmax(l)
	mx := l[best]
	var s float64
	for _, v := range l {
		s += math.Exp(v - mx)
	}
	lse := mx + math.Log(s)
	for i, v := range l {
		dst[i] = v - lse
	}
	return best
}

func (c *Softmax) logProbs(x []float64) int {
	if len(x) != c.enc.inDim() {
		panic(fmt.Sprintf("skills: softmax: len(x) = %d, want %d", len(x), c.enc.inDim()))
	}
	return logSoftmax(c.lq, c.enc.forward(x, 1))
}

// LogProbs writes log q(k | x) for k = 0..K-1 into dst. It panics if
// len(dst) != K or len(x) != InDim().
func (c *Softmax) LogProbs(dst, x []float64) {
	if len(dst) != c.k {
		panic(fmt.Sprintf("skills: softmax log probs: len(dst) = %d, want %d", len(dst), c.k))
	}
	c.logProbs(x)
	copy(dst, c.lq)
}

// Features writes (log q(0|x), ..., log q(K-1|x), log K) into dst. It
// panics if len(dst) != K+1 or len(x) != InDim().
func (c *Softmax) Features(dst, x []float64) {
	if len(dst) != c.k+1 {
		panic(fmt.Sprintf("skills: softmax features: len(dst) = %d, want %d", len(dst), c.k+1))
	}
	c.logProbs(x)
	copy(dst, c.lq)
	dst[c.k] = c.logK
}

// LogProb returns sum_k z_k log q(k | x), which is log q(z | x) for a
// one-hot z. It panics if a length is wrong.
func (c *Softmax) LogProb(x, z []float64) float64 {
	if len(z) != c.k {
		panic(fmt.Sprintf("skills: softmax: len(z) = %d, want %d", len(z), c.k))
	}
	c.logProbs(x)
	return vec.DotSeq(c.lq, z)
}

// Reward returns the pseudo-reward log q(z | x) - log p(z) =
// log q(z | x) + log K for a one-hot z (generally
// sum_k z_k log q(k | x) + log K). It panics if a length is wrong.
func (c *Softmax) Reward(x, z []float64) float64 {
	return c.LogProb(x, z) + c.logK
}

// TaskVector writes (z, 1) into dst (len K+1). It panics if a length is
// wrong.
func (c *Softmax) TaskVector(dst, z []float64) {
	if len(dst) != c.k+1 || len(z) != c.k {
		panic(fmt.Sprintf("skills: softmax task vector: len(dst) = %d, len(z) = %d, want %d and %d", len(dst), len(z), c.k+1, c.k))
	}
	copy(dst, z)
	dst[c.k] = 1
}

// Predict returns the most likely skill argmax_k q(k | x) (the first on
// ties). It panics if len(x) != InDim().
func (c *Softmax) Predict(x []float64) int {
	return c.logProbs(x)
}

// Update takes one Adam step on the mean cross-entropy
// -(1/n) sum_i sum_k z_ik log q(k | x_i); see Discriminator. Rows of z are
// normally one-hot; any probability vectors are accepted.
func (c *Softmax) Update(x, z []float64) (float64, error) {
	n := c.rows(x, z, c.k, "softmax")
	loss, g := c.lossGrad(c, x, z, n, c.k)
	return loss, c.step(loss, g)
}

func (c *Softmax) chunkLoss(dy, y, z []float64, m int, inv float64) float64 {
	k := c.k
	var loss float64
	for i := 0; i < m; i++ {
		li, zi, di := y[i*k:(i+1)*k], z[i*k:(i+1)*k], dy[i*k:(i+1)*k]
		logSoftmax(di, li) // di holds log q for now
		var zs float64
		for j, zj := range zi {
			loss -= zj * di[j]
			zs += zj
		}
		// d/dl_j of -sum z log softmax(l) = q_j sum(z) - z_j.
		for j, zj := range zi {
			di[j] = inv * (math.Exp(di[j])*zs - zj)
		}
	}
	return loss
}

// Clone returns a deep copy of c, optimiser state included.
func (c *Softmax) Clone() Discriminator {
	d := *c
	d.core = c.core.clone()
	d.net.Hidden = append([]int(nil), c.net.Hidden...)
	d.lq = make([]float64, c.k)
	return &d
}
