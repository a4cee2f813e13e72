package skills

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/successor-go/successor/internal/nn"
	"github.com/successor-go/successor/internal/vec"
)

// VMFConfig configures a von Mises–Fisher discriminator. Zero fields other
// than In and Dim mean the defaults.
type VMFConfig struct {
	// In is the length of an observation x (required, >= 1).
	In int
	// Dim is d, the length of a skill z on the sphere S^{d-1} (required, >= 2).
	Dim int
	// Net describes f; the zero value is linear.
	Net NetConfig
	// Kappa is the concentration kappa, or its starting value when
	// LearnKappa is set. 0 means 1.
	Kappa float64
	// LearnKappa makes kappa a parameter, learned by Adam on log kappa
	// with the rest of the loss (same Optim settings, no clipping), and
	// kept in [1e-6, MaxKappa].
	LearnKappa bool
	// MaxKappa caps a learned kappa. 0 means 1000.
	MaxKappa float64
	// Optim sets the optimiser.
	Optim OptimConfig
}

// minKappa is the smallest learned kappa.
const minKappa = 1e-6

// minNorm is the length of f(x) below which phi(x) is taken as 0.
const minNorm = 1e-100

// VMF is the von Mises–Fisher discriminator
//
//	phi(x) = f(x) / ||f(x)||,
//	log q(z | x) = kappa phi(x) . z + log C_d(kappa),
//
// for skills z on the unit sphere S^{d-1}, with intrinsic reward
// phi(x) . z and task vector w = z. Features has length d. If
// ||f(x)|| < 1e-100, phi(x) is taken as the zero vector (q uniform), and
// the gradient of the loss with respect to f(x) as -kappa z / n.
type VMF struct {
	core
	dim      int
	net      NetConfig
	learn    bool
	maxKappa float64
	kappa    float64
	rho      [1]float64 // log kappa when learned
	kgrad    [1]float64
	kadam    *nn.Adam
	logNorm  float64 // log C_d(kappa)
	csum     float64 // sum of phi_i . z_i over the last minibatch
	phi      []float64
}

var (
	_ Discriminator = (*VMF)(nil)
	_ chunkLosser   = (*VMF)(nil)
)

// NewVMF returns a von Mises–Fisher discriminator with weights drawn from
// rng. It returns an error wrapping ErrConfig if cfg is nil, a size is out
// of range, kappa is not positive and finite or above MaxKappa, or rng is
// nil.
func NewVMF(cfg *VMFConfig, rng *rand.Rand) (*VMF, error) {
	if cfg == nil || rng == nil {
		return nil, fmt.Errorf("skills: new vmf: nil config or rng: %w", ErrConfig)
	}
	c := *cfg
	c.Net.Hidden = append([]int(nil), cfg.Net.Hidden...)
	if c.Kappa == 0 {
		c.Kappa = 1
	}
	if c.MaxKappa == 0 {
		c.MaxKappa = 1000
	}
	var err error
	if c.Optim, err = c.Optim.resolve(); err != nil {
		return nil, fmt.Errorf("skills: new vmf: %w", err)
	}
	v, err := buildVMF(&c, rng)
	if err != nil {
		return nil, fmt.Errorf("skills: new vmf: %w", err)
	}
	return v, nil
}

// buildVMF checks c, whose defaults are already filled in, and returns a
// discriminator with weights drawn from rng.
func buildVMF(c *VMFConfig, rng *rand.Rand) (*VMF, error) {
	if err := c.Optim.check(); err != nil {
		return nil, err
	}
	if err := c.Optim.checkNet(&c.Net); err != nil {
		return nil, err
	}
	if err := c.check(); err != nil {
		return nil, err
	}
	enc, err := newEncoder(c.In, c.Dim, &c.Net, rng)
	if err != nil {
		return nil, err
	}
	v := &VMF{core: newCore(enc, c.Optim), dim: c.Dim, net: c.Net, learn: c.LearnKappa, maxKappa: c.MaxKappa, kadam: newAdam(1, &c.Optim)}
	v.setKappa(c.Kappa)
	v.phi = make([]float64, c.Dim)
	return v, nil
}

func (c *VMFConfig) check() error {
	switch {
	case c.In < 1 || c.In > maxWidth:
		return fmt.Errorf("observation length %d not in 1..%d: %w", c.In, maxWidth, ErrConfig)
	case c.Dim < 2 || c.Dim > maxWidth:
		return fmt.Errorf("skill dimension %d not in 2..%d: %w", c.Dim, maxWidth, ErrConfig)
	case !(c.MaxKappa >= minKappa) || math.IsInf(c.MaxKappa, 0):
		return fmt.Errorf("max kappa %g: %w", c.MaxKappa, ErrConfig)
	case !(c.Kappa > 0) || c.LearnKappa && (c.Kappa > c.MaxKappa || c.Kappa < minKappa) || math.IsInf(c.Kappa, 0):
		return fmt.Errorf("kappa %g: %w", c.Kappa, ErrConfig)
	}
	return c.Net.check()
}

// setKappa sets kappa (and log kappa) and the cached log C_d(kappa). A
// learned kappa is always exp(log kappa), so that saving log kappa restores
// it bit for bit.
func (v *VMF) setKappa(k float64) {
	v.rho[0] = math.Log(k)
	if v.learn {
		k = math.Exp(v.rho[0])
	}
	v.kappa = k
	v.logNorm = VMFLogNorm(v.dim, k)
}

// InDim returns the length of an observation.
func (v *VMF) InDim() int { return v.enc.inDim() }

// ZDim returns d.
func (v *VMF) ZDim() int { return v.dim }

// FeatureDim returns d.
func (v *VMF) FeatureDim() int { return v.dim }

// Kappa returns the current concentration kappa.
func (v *VMF) Kappa() float64 { return v.kappa }

// LogNorm returns log C_d(kappa) for the current kappa.
func (v *VMF) LogNorm() float64 { return v.logNorm }

// Steps returns the number of updates taken.
func (v *VMF) Steps() int { return v.steps }

// Optim returns the optimiser settings, defaults filled in.
func (v *VMF) Optim() OptimConfig { return v.opt }

// Features writes phi(x) = f(x)/||f(x)|| into dst. It panics if
// len(dst) != d or len(x) != InDim().
func (v *VMF) Features(dst, x []float64) {
	if len(dst) != v.dim || len(x) != v.enc.inDim() {
		panic(fmt.Sprintf("skills: vmf features: len(dst) = %d, len(x) = %d, want %d and %d", len(dst), len(x), v.dim, v.enc.inDim()))
	}
	unit(dst, v.enc.forward(x, 1))
}

// unit writes f/||f|| into dst, or zeros if ||f|| < minNorm, and returns
// ||f||.
func unit(dst, f []float64) float64 {
	n := math.Sqrt(vec.DotSeq(f, f))
	if n < minNorm {
		clear(dst)
		return n
	}
	inv := 1 / n
	for i, v := range f {
		dst[i] = v * inv
	}
	return n
}

// LogProb returns kappa phi(x) . z + log C_d(kappa), assuming ||z|| = 1.
// It panics if a length is wrong.
func (v *VMF) LogProb(x, z []float64) float64 {
	return v.kappa*v.Reward(x, z) + v.logNorm
}

// Reward returns phi(x) . z. It panics if a length is wrong.
func (v *VMF) Reward(x, z []float64) float64 {
	if len(z) != v.dim {
		panic(fmt.Sprintf("skills: vmf: len(z) = %d, want %d", len(z), v.dim))
	}
	v.Features(v.phi, x)
	return vec.DotSeq(v.phi, z)
}

// TaskVector copies z into dst: the task vector of a vMF skill is the
// skill itself. It panics if a length is wrong.
func (v *VMF) TaskVector(dst, z []float64) {
	if len(dst) != v.dim || len(z) != v.dim {
		panic(fmt.Sprintf("skills: vmf task vector: len(dst) = %d, len(z) = %d, want %d", len(dst), len(z), v.dim))
	}
	copy(dst, z)
}

// Update takes one Adam step on the mean of
// -log q(z_i | x_i) = -kappa phi(x_i) . z_i - log C_d(kappa); see
// Discriminator. With LearnKappa it also steps log kappa along
// kappa (A_d(kappa) - mean phi . z), the derivative of the same loss.
func (v *VMF) Update(x, z []float64) (float64, error) {
	n := v.rows(x, z, v.dim, "vmf")
	v.csum = 0
	loss, g := v.lossGrad(v, x, z, n, v.dim)
	if err := v.step(loss, g); err != nil {
		return loss, err
	}
	if v.learn {
		v.kgrad[0] = v.kappaGrad(n)
		v.kadam.Step(v.rho[:], v.kgrad[:])
		v.rho[0] = min(max(v.rho[0], math.Log(minKappa)), math.Log(v.maxKappa))
		v.kappa = math.Exp(v.rho[0])
		v.logNorm = VMFLogNorm(v.dim, v.kappa)
	}
	return loss, nil
}

// kappaGrad returns d loss / d log kappa = kappa (A_d(kappa) - mean phi.z)
// for the n pairs of the last lossGrad.
func (v *VMF) kappaGrad(n int) float64 {
	return v.kappa * (VMFMeanLength(v.dim, v.kappa) - v.csum/float64(n))
}

func (v *VMF) chunkLoss(dy, y, z []float64, m int, inv float64) float64 {
	d := v.dim
	var loss float64
	for i := 0; i < m; i++ {
		fi, zi, di := y[i*d:(i+1)*d], z[i*d:(i+1)*d], dy[i*d:(i+1)*d]
		nrm := math.Sqrt(vec.DotSeq(fi, fi))
		if nrm < minNorm {
			for j, zj := range zi {
				di[j] = -v.kappa * inv * zj
			}
			loss -= v.logNorm
			continue
		}
		// phi = f/|f|; c = phi.z; d(phi.z)/df = (z - c phi)/|f|.
		s := 1 / nrm
		c := vec.DotSeq(fi, zi) * s
		v.csum += c
		loss -= v.kappa*c + v.logNorm
		a := -v.kappa * inv * s
		for j, zj := range zi {
			di[j] = a * (zj - c*fi[j]*s)
		}
	}
	return loss
}

// Clone returns a deep copy of v, optimiser state included.
func (v *VMF) Clone() Discriminator {
	c := *v
	c.core = v.core.clone()
	c.net.Hidden = append([]int(nil), v.net.Hidden...)
	c.kadam = v.kadam.Clone()
	c.phi = make([]float64, v.dim)
	return &c
}
