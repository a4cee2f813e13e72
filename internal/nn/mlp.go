package nn

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/successor-go/successor/internal/errs"
)

// Sentinel errors, the library's shared ones (package internal/errs), so
// that errors.Is works across packages.
var (
	// ErrConfig is wrapped by errors about an invalid network or optimiser
	// configuration.
	ErrConfig = errs.Config
	// ErrCorrupt is wrapped by errors about saved bytes that cannot be
	// loaded: wrong magic, unknown version, inconsistent sizes, short data
	// or a bad checksum.
	ErrCorrupt = errs.Corrupt
)

// Activation is the elementwise nonlinearity of a layer.
type Activation uint8

const (
	// Identity is f(u) = u.
	Identity Activation = iota
	// ReLU is f(u) = max(0, u), with derivative 0 at u = 0.
	ReLU
	// Tanh is f(u) = tanh(u).
	Tanh
)

// String returns the activation's name.
func (a Activation) String() string {
	switch a {
	case Identity:
		return "identity"
	case ReLU:
		return "relu"
	case Tanh:
		return "tanh"
	}
	return fmt.Sprintf("Activation(%d)", uint8(a))
}

// Limits on sizes, checked by New and by the loaders.
const (
	MaxWidth  = 1 << 14 // largest layer width
	MaxLayers = 64      // most layers
	MaxRows   = 1 << 14 // largest MaxBatch
	maxBuffer = 1 << 24 // largest MaxBatch times widest layer
)

// Config describes a multilayer perceptron.
type Config struct {
	// Sizes are the widths In, hidden..., Out; at least two entries.
	Sizes []int
	// Acts are the activations of the len(Sizes)-1 layers. Nil means
	// ReLU on hidden layers and Identity on the output layer.
	Acts []Activation
	// MaxBatch is the largest number of rows Forward accepts. 0 means 1.
	MaxBatch int
}

// MLP is a multilayer perceptron of dense layers. Create it with New.
type MLP struct {
	sizes    []int
	acts     []Activation
	maxBatch int

	params []float64 // W_1, b_1, W_2, b_2, ...
	grad   []float64 // same layout
	woff   []int     // offset of W_l in params
	boff   []int     // offset of b_l in params

	x   []float64   // copy of the last input, maxBatch*In
	h   [][]float64 // h[l] = H_{l+1}, maxBatch*Out_l
	d0  []float64   // delta ping-pong buffers, maxBatch*maxWidth
	d1  []float64
	n   int // rows of the last Forward
	fwd bool
}

// New returns a network described by cfg with weights drawn from rng (see
// the package doc for the initialisation). It returns an error wrapping
// ErrConfig if a size is not positive or too large, the activations do not
// match the layers, or rng is nil.
func New(cfg *Config, rng *rand.Rand) (*MLP, error) {
	if cfg == nil {
		return nil, fmt.Errorf("nn: new: nil config: %w", ErrConfig)
	}
	if rng == nil {
		return nil, fmt.Errorf("nn: new: nil rng: %w", ErrConfig)
	}
	acts := cfg.Acts
	if acts == nil && len(cfg.Sizes) >= 2 {
		acts = make([]Activation, len(cfg.Sizes)-1)
		for i := range acts {
			acts[i] = ReLU
		}
		acts[len(acts)-1] = Identity
	}
	maxBatch := cfg.MaxBatch
	if maxBatch == 0 {
		maxBatch = 1
	}
	m, err := build(cfg.Sizes, acts, maxBatch)
	if err != nil {
		return nil, fmt.Errorf("nn: new: %w", err)
	}
	for l := range m.acts {
		in, out := m.sizes[l], m.sizes[l+1]
		var a float64
		if m.acts[l] == ReLU {
			a = math.Sqrt(6 / float64(in))
		} else {
			a = math.Sqrt(6 / float64(in+out))
		}
		w := m.params[m.woff[l] : m.woff[l]+in*out]
		for i := range w {
			w[i] = (2*rng.Float64() - 1) * a
		}
	}
	return m, nil
}

// build validates the shape and allocates a zero network.
func build(sizes []int, acts []Activation, maxBatch int) (*MLP, error) {
	if len(sizes) < 2 || len(sizes)-1 > MaxLayers {
		return nil, fmt.Errorf("%d sizes, want 2..%d: %w", len(sizes), MaxLayers+1, ErrConfig)
	}
	if len(acts) != len(sizes)-1 {
		return nil, fmt.Errorf("%d activations for %d layers: %w", len(acts), len(sizes)-1, ErrConfig)
	}
	if maxBatch < 1 || maxBatch > MaxRows {
		return nil, fmt.Errorf("max batch %d, want 1..%d: %w", maxBatch, MaxRows, ErrConfig)
	}
	maxw := 0
	for i, s := range sizes {
		if s < 1 || s > MaxWidth {
			return nil, fmt.Errorf("size[%d] = %d, want 1..%d: %w", i, s, MaxWidth, ErrConfig)
		}
		maxw = max(maxw, s)
	}
	if maxBatch*maxw > maxBuffer {
		return nil, fmt.Errorf("max batch %d times width %d exceeds %d: %w", maxBatch, maxw, maxBuffer, ErrConfig)
	}
	for i, a := range acts {
		if a > Tanh {
			return nil, fmt.Errorf("layer %d: unknown activation %d: %w", i, a, ErrConfig)
		}
	}
	L := len(acts)
	m := &MLP{
		sizes:    append([]int(nil), sizes...),
		acts:     append([]Activation(nil), acts...),
		maxBatch: maxBatch,
		woff:     make([]int, L),
		boff:     make([]int, L),
		h:        make([][]float64, L),
	}
	p := 0
	for l := 0; l < L; l++ {
		m.woff[l] = p
		p += sizes[l] * sizes[l+1]
		m.boff[l] = p
		p += sizes[l+1]
		m.h[l] = make([]float64, maxBatch*sizes[l+1])
	}
	m.params = make([]float64, p)
	m.grad = make([]float64, p)
	m.x = make([]float64, maxBatch*sizes[0])
	m.d0 = make([]float64, maxBatch*maxw)
	m.d1 = make([]float64, maxBatch*maxw)
	return m, nil
}

// In returns the input width.
func (m *MLP) In() int { return m.sizes[0] }

// Out returns the output width.
func (m *MLP) Out() int { return m.sizes[len(m.sizes)-1] }

// MaxBatch returns the largest batch Forward accepts.
func (m *MLP) MaxBatch() int { return m.maxBatch }

// Sizes returns a copy of the layer widths In, hidden..., Out.
func (m *MLP) Sizes() []int { return append([]int(nil), m.sizes...) }

// Acts returns a copy of the layer activations.
func (m *MLP) Acts() []Activation { return append([]Activation(nil), m.acts...) }

// NumParams returns the number of weights and biases.
func (m *MLP) NumParams() int { return len(m.params) }

// Params returns a view of all parameters, layer by layer, W_l (In_l x
// Out_l, row-major) then b_l. Writes through it change the network.
func (m *MLP) Params() []float64 { return m.params }

// Grad returns a view of the gradient written by Backward, in the layout
// of Params.
func (m *MLP) Grad() []float64 { return m.grad }

// Layer returns views of the weights (In_l x Out_l, row-major) and biases
// of layer l (0-based).
func (m *MLP) Layer(l int) (w, b []float64) {
	in, out := m.sizes[l], m.sizes[l+1]
	return m.params[m.woff[l] : m.woff[l]+in*out], m.params[m.boff[l] : m.boff[l]+out]
}

// Forward computes the outputs for the n rows of x (row-major, len
// n*In) and returns a view of them (n rows of Out) that stays valid until
// the next Forward. It keeps a copy of x and the activations for Backward.
// It panics if n is not in 1..MaxBatch or len(x) != n*In.
func (m *MLP) Forward(x []float64, n int) []float64 {
	in := m.sizes[0]
	if n < 1 || n > m.maxBatch {
		panic(fmt.Sprintf("nn: forward: batch %d not in 1..%d", n, m.maxBatch))
	}
	if len(x) != n*in {
		panic(fmt.Sprintf("nn: forward: len(x) = %d, want %d", len(x), n*in))
	}
	copy(m.x, x)
	prev := m.x[:n*in]
	for l, act := range m.acts {
		in, out := m.sizes[l], m.sizes[l+1]
		w := m.params[m.woff[l] : m.woff[l]+in*out]
		b := m.params[m.boff[l] : m.boff[l]+out]
		h := m.h[l][:n*out]
		for r := 0; r < n; r++ {
			copy(h[r*out:(r+1)*out], b)
		}
		gemm(false, false, n, out, in, 1, prev, in, w, out, 1, h, out)
		switch act {
		case ReLU:
			for i, v := range h {
				if v < 0 {
					h[i] = 0
				}
			}
		case Tanh:
			for i, v := range h {
				h[i] = math.Tanh(v)
			}
		}
		prev = h
	}
	m.n = n
	m.fwd = true
	return prev
}

// Backward takes dy = dLoss/dOutput for the rows of the last Forward (len
// n*Out; not modified), writes dLoss/dParams into Grad (overwriting it),
// and, if dx is not nil, writes dLoss/dInput into dx (len n*In). It panics
// if no Forward came before or a length is wrong.
func (m *MLP) Backward(dx, dy []float64) {
	if !m.fwd {
		panic("nn: backward: no forward pass")
	}
	n := m.n
	L := len(m.acts)
	if len(dy) != n*m.sizes[L] {
		panic(fmt.Sprintf("nn: backward: len(dy) = %d, want %d", len(dy), n*m.sizes[L]))
	}
	if dx != nil && len(dx) != n*m.sizes[0] {
		panic(fmt.Sprintf("nn: backward: len(dx) = %d, want %d", len(dx), n*m.sizes[0]))
	}
	cur, spare := m.d0, m.d1
	d := cur[:n*m.sizes[L]]
	copy(d, dy)
	for l := L - 1; l >= 0; l-- {
		in, out := m.sizes[l], m.sizes[l+1]
		h := m.h[l][:n*out]
		switch m.acts[l] {
		case ReLU:
			for i, v := range h {
				if v <= 0 {
					d[i] = 0
				}
			}
		case Tanh:
			for i, v := range h {
				d[i] *= 1 - v*v
			}
		}
		var prev []float64
		if l > 0 {
			prev = m.h[l-1][:n*in]
		} else {
			prev = m.x[:n*in]
		}
		gw := m.grad[m.woff[l] : m.woff[l]+in*out]
		gemm(true, false, in, out, n, 1, prev, in, d, out, 0, gw, out)
		gb := m.grad[m.boff[l] : m.boff[l]+out]
		copy(gb, d[:out])
		for r := 1; r < n; r++ {
			row := d[r*out : (r+1)*out]
			for j, v := range row {
				gb[j] += v
			}
		}
		var next []float64
		switch {
		case l > 0:
			next = spare[:n*in]
		case dx != nil:
			next = dx
		default:
			continue
		}
		w := m.params[m.woff[l] : m.woff[l]+in*out]
		gemm(false, true, n, in, out, 1, d, out, w, out, 0, next, in)
		d = next
		cur, spare = spare, cur
	}
}

// Clone returns a deep copy of m (parameters and shape; gradients and
// activations are zeroed).
func (m *MLP) Clone() *MLP {
	c, err := build(m.sizes, m.acts, m.maxBatch)
	if err != nil {
		panic("nn: clone: " + err.Error())
	}
	copy(c.params, m.params)
	return c
}

// SameShape reports whether m and o have the same sizes and activations.
func (m *MLP) SameShape(o *MLP) bool {
	if len(m.sizes) != len(o.sizes) {
		return false
	}
	for i := range m.sizes {
		if m.sizes[i] != o.sizes[i] {
			return false
		}
	}
	for i := range m.acts {
		if m.acts[i] != o.acts[i] {
			return false
		}
	}
	return true
}

// CopyFrom sets the parameters of m to those of src (a hard target-network
// refresh). It panics if the shapes differ.
func (m *MLP) CopyFrom(src *MLP) {
	if !m.SameShape(src) {
		panic("nn: copy from: shapes differ")
	}
	copy(m.params, src.params)
}

// Blend sets theta <- (1 - tau) theta + tau theta_src elementwise (Polyak
// averaging of a target network). It panics if the shapes differ.
func (m *MLP) Blend(src *MLP, tau float64) {
	if !m.SameShape(src) {
		panic("nn: blend: shapes differ")
	}
	p := m.params
	for i, v := range src.params {
		p[i] = (1-tau)*p[i] + tau*v
	}
}

// ClipNorm scales g in place by c/||g||_2 if its Euclidean norm exceeds c,
// and returns the norm before clipping. c <= 0 or +Inf disables clipping.
func ClipNorm(g []float64, c float64) float64 {
	var ss float64
	for _, v := range g {
		ss += v * v
	}
	norm := math.Sqrt(ss)
	if c > 0 && norm > c {
		s := c / norm
		for i := range g {
			g[i] *= s
		}
	}
	return norm
}

// MSE returns the loss (1/(2n)) sum_ij mask_ij (y_ij - t_ij)^2 over the n
// rows of y and writes its gradient mask_ij (y_ij - t_ij)/n into dy. A nil
// mask weights every entry 1. It panics if the lengths differ or n < 1.
func MSE(dy, y, t, mask []float64, n int) float64 {
	if len(dy) != len(y) || len(t) != len(y) || (mask != nil && len(mask) != len(y)) || n < 1 {
		panic("nn: mse: length mismatch")
	}
	inv := 1 / float64(n)
	var loss float64
	for i, v := range y {
		e := v - t[i]
		if mask != nil {
			e *= mask[i]
			loss += e * (v - t[i])
		} else {
			loss += e * e
		}
		dy[i] = e * inv
	}
	return loss * inv / 2
}

// SoftmaxCrossEntropy returns the mean cross-entropy
// -(1/n) sum_i log softmax(y_i)[labels[i]] of n rows of logits y (each of
// width k) and writes its gradient (softmax(y_i) - onehot(labels[i]))/n
// into dy. Rows are shifted by their maximum for stability. It panics if
// a length is wrong or a label is out of range.
func SoftmaxCrossEntropy(dy, y []float64, labels []int, n, k int) float64 {
	if n < 1 || k < 1 || len(y) != n*k || len(dy) != n*k || len(labels) != n {
		panic("nn: softmax cross-entropy: length mismatch")
	}
	inv := 1 / float64(n)
	var loss float64
	for i := 0; i < n; i++ {
		row := y[i*k : (i+1)*k]
		d := dy[i*k : (i+1)*k]
		mx := row[0]
		for _, v := range row[1:] {
			mx = max(mx, v)
		}
		var z float64
		for j, v := range row {
			e := math.Exp(v - mx)
			d[j] = e
			z += e
		}
		lab := labels[i]
		loss += math.Log(z) - (row[lab] - mx)
		for j := range d {
			d[j] *= inv / z
		}
		d[lab] -= inv
	}
	return loss * inv
}
