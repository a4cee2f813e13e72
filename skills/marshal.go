package skills

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/successor-go/successor/internal/fileio"
)

// Binary format of a discriminator: a record of the library's framing
// (package internal/fileio: magic "SKDS", format version 3, payload
// length, payload, CRC-32C). The payload, little-endian, integers as
// int64, floats as their IEEE-754 bits, flags as one byte (0 or 1):
//
//	kind       one byte: 1 = VMF, 2 = Softmax
//	in         observation length
//	zdim       d (VMF) or K (Softmax)
//	layers     number of hidden layers h
//	hidden     h widths
//	tanh       flag
//	maxBatch   Net.MaxBatch as configured
//	optim      5 floats: learn rate, beta1, beta2, eps, clip norm
//	method     one byte: the OptimMethod
//	steps      updates taken
//	VMF only:  learnKappa flag, maxKappa, kappa (log kappa when learned),
//	           the kappa Adam step and moments m, v
//	params     the P parameters (P follows from the shape: layer by layer,
//	           W then b)
//	adam       step, then P first and P second moments
//
// Floats are stored as their bits, so a round trip is bit-exact; the
// loader accepts only finite values and rejects trailing bytes, so
// MarshalBinary of a loaded value reproduces its input. Versions 1 and 2
// were this package's own framing (with a CRC-32 IEEE); their files are
// refused as of another version. The sparse optimiser keeps the same
// state as dense Adam (global step, moments).

const (
	fileMagic   = "SKDS"
	fileVersion = 3
	kindVMF     = 1
	kindSoftmax = 2
)

// headerSize is the payload length before the weights, for the Encoder's
// buffer.
func headerSize(kind uint8, net *NetConfig) int {
	n := 1 + 8*3 + 8*len(net.Hidden) + 1 + 8 + 8*5 + 1 + 8
	if kind == kindVMF {
		n += 1 + 8*2 + 8 + 8*2
	}
	return n
}

func newFileEncoder(kind uint8, c *core, in, zdim int, net *NetConfig) *fileio.Encoder {
	np := len(c.enc.params())
	e := fileio.NewEncoder(fileMagic, fileVersion, headerSize(kind, net)+8*np+8+16*np)
	e.Uint8(kind)
	e.Int(in)
	e.Int(zdim)
	e.Int(len(net.Hidden))
	e.Ints(net.Hidden)
	e.Bool(net.Tanh)
	e.Int(net.MaxBatch)
	o := c.opt
	e.Float64(o.StepSize)
	e.Float64(o.Beta1)
	e.Float64(o.Beta2)
	e.Float64(o.Eps)
	e.Float64(o.ClipNorm)
	e.Uint8(uint8(o.Method))
	e.Int(c.steps)
	return e
}

func sealWeights(what string, e *fileio.Encoder, c *core) ([]byte, error) {
	e.Float64s(c.enc.params())
	e.Int(c.adam.T)
	e.Float64s(c.adam.M)
	e.Float64s(c.adam.V)
	b, err := e.Seal()
	if err != nil {
		return nil, fmt.Errorf("skills: save %s: %w", what, err)
	}
	return b, nil
}

// MarshalBinary encodes v exactly: configuration, weights, kappa and
// optimiser state (format in marshal.go).
func (v *VMF) MarshalBinary() ([]byte, error) {
	e := newFileEncoder(kindVMF, &v.core, v.InDim(), v.dim, &v.net)
	e.Bool(v.learn)
	e.Float64(v.maxKappa)
	if v.learn {
		e.Float64(v.rho[0])
	} else {
		e.Float64(v.kappa)
	}
	e.Int(v.kadam.T)
	e.Float64(v.kadam.M[0])
	e.Float64(v.kadam.V[0])
	return sealWeights("vmf", e, &v.core)
}

// MarshalBinary encodes c exactly: configuration, weights and optimiser
// state (format in marshal.go).
func (c *Softmax) MarshalBinary() ([]byte, error) {
	e := newFileEncoder(kindSoftmax, &c.core, c.InDim(), c.k, &c.net)
	return sealWeights("softmax", e, &c.core)
}

// header is the decoded common part of a saved discriminator.
type header struct {
	kind     uint8
	in, zdim int
	net      NetConfig
	opt      OptimConfig
	steps    int
	learn    bool
	maxKappa float64
	kappa    float64
	kt       int
	km, kv   float64
	d        *fileio.Decoder // positioned at the weights
}

// openData checks the frame and decodes the header of data; what
// prefixes the error messages.
func openData(what string, data []byte) (*header, error) {
	d, err := fileio.Open(what, data, fileMagic, fileVersion)
	if err != nil {
		return nil, err
	}
	h := &header{d: d}
	h.kind = d.Uint8("kind")
	h.in, h.zdim = d.Size("in", 1, maxWidth), d.Size("zdim", 1, maxWidth)
	if nh := d.Size("layers", 0, maxHiddenLayers); nh > 0 {
		h.net.Hidden = make([]int, nh)
		d.ReadInts("hidden", h.net.Hidden)
	}
	h.net.Tanh = d.Bool("tanh")
	h.net.MaxBatch = d.Size("max batch", 0, maxRowsNet)
	h.opt = OptimConfig{StepSize: d.Float64("learn rate"), Beta1: d.Float64("beta1"), Beta2: d.Float64("beta2"),
		Eps: d.Float64("eps"), ClipNorm: d.Float64("clip norm")}
	h.opt.Method = OptimMethod(d.Uint8("method"))
	h.steps = d.Size("steps", 0, math.MaxInt32)
	switch h.kind {
	case kindVMF:
		h.learn = d.Bool("learn kappa")
		h.maxKappa, h.kappa = d.Float64("max kappa"), d.Float64("kappa")
		h.kt, h.km, h.kv = d.Size("kappa step", 0, math.MaxInt32), d.Float64("kappa m"), d.Float64("kappa v")
	case kindSoftmax:
	default:
		d.Fail("kind", "%d is neither vmf (%d) nor softmax (%d)", h.kind, kindVMF, kindSoftmax)
	}
	if err := d.Err(); err != nil {
		return nil, err
	}
	if err := h.net.check(); err != nil {
		return nil, d.Fail("net", "%v", err)
	}
	// The parameter count follows from the shape (each size is at most
	// maxWidth, so no product overflows); the parameters, their step and
	// both moments must be exactly the bytes left, checked before
	// anything of that size is allocated.
	var np int
	prev := h.in
	for _, w := range append(append([]int(nil), h.net.Hidden...), h.zdim) {
		np += prev*w + w
		prev = w
	}
	if d.Remaining() != 8*np+8+16*np {
		return nil, d.Fail("weights", "%d bytes left for %d parameters, want %d", d.Remaining(), np, 8*np+8+16*np)
	}
	return h, nil
}

// readWeights fills the encoder parameters and Adam state of c.
func (h *header) readWeights(c *core) error {
	d := h.d
	p := c.enc.params()
	d.ReadFloat64s("parameters", p)
	t := d.Size("adam step", 0, math.MaxInt32)
	d.ReadFloat64s("adam m", c.adam.M)
	d.ReadFloat64s("adam v", c.adam.V)
	if err := d.Finish(); err != nil {
		return err
	}
	if !allFinite(p) || !allFinite(c.adam.M) || !allFinite(c.adam.V) {
		return d.Fail("weights", "non-finite parameter or moment")
	}
	c.adam.T = t
	c.steps = h.steps
	return nil
}

// loadRNG seeds the throwaway initialisation of a network whose weights are
// about to be overwritten.
func loadRNG() *rand.Rand { return rand.New(rand.NewPCG(0, 0)) }

func (h *header) vmf() (*VMF, error) {
	if h.kind != kindVMF {
		return nil, h.d.Fail("kind", "%d is not vmf", h.kind)
	}
	if !isFinite(h.maxKappa) || !isFinite(h.kappa) || !isFinite(h.km) || !isFinite(h.kv) {
		return nil, h.d.Fail("kappa", "non-finite kappa or kappa moment")
	}
	c := VMFConfig{In: h.in, Dim: h.zdim, Net: h.net, Kappa: h.kappa, LearnKappa: h.learn, MaxKappa: h.maxKappa, Optim: h.opt}
	if h.learn {
		if !(h.kappa >= math.Log(minKappa) && h.kappa <= math.Log(h.maxKappa)) {
			return nil, h.d.Fail("kappa", "log kappa %g out of range", h.kappa)
		}
		c.Kappa = min(max(math.Exp(h.kappa), minKappa), c.MaxKappa) // for the range check only
	}
	v, err := buildVMF(&c, loadRNG())
	if err != nil {
		return nil, h.d.Fail("configuration", "%v", err)
	}
	if h.learn {
		v.rho[0] = h.kappa
		v.kappa = math.Exp(h.kappa)
		v.logNorm = VMFLogNorm(v.dim, v.kappa)
	}
	v.kadam.T, v.kadam.M[0], v.kadam.V[0] = h.kt, h.km, h.kv
	if err := h.readWeights(&v.core); err != nil {
		return nil, err
	}
	return v, nil
}

func (h *header) softmax() (*Softmax, error) {
	if h.kind != kindSoftmax {
		return nil, h.d.Fail("kind", "%d is not softmax", h.kind)
	}
	c := SoftmaxConfig{In: h.in, K: h.zdim, Net: h.net, Optim: h.opt}
	s, err := buildSoftmax(&c, loadRNG())
	if err != nil {
		return nil, h.d.Fail("configuration", "%v", err)
	}
	if err := h.readWeights(&s.core); err != nil {
		return nil, err
	}
	return s, nil
}

// UnmarshalBinary replaces v with the VMF discriminator encoded by
// MarshalBinary. It returns an error wrapping ErrCorrupt if data is
// malformed (a bad frame, another kind, sizes or settings out of range,
// non-finite weights), in which case v is unchanged.
func (v *VMF) UnmarshalBinary(data []byte) error {
	h, err := openData("skills: load vmf", data)
	if err != nil {
		return err
	}
	w, err := h.vmf()
	if err != nil {
		return err
	}
	*v = *w
	return nil
}

// UnmarshalBinary replaces c with the Softmax discriminator encoded by
// MarshalBinary. It returns an error wrapping ErrCorrupt if data is
// malformed, in which case c is unchanged.
func (c *Softmax) UnmarshalBinary(data []byte) error {
	h, err := openData("skills: load softmax", data)
	if err != nil {
		return err
	}
	s, err := h.softmax()
	if err != nil {
		return err
	}
	*c = *s
	return nil
}

// Marshal encodes a *VMF or *Softmax exactly, for embedding in a larger
// checkpoint. It returns an error wrapping ErrUnsupported for other types.
func Marshal(d Discriminator) ([]byte, error) {
	switch d := d.(type) {
	case *VMF:
		return d.MarshalBinary()
	case *Softmax:
		return d.MarshalBinary()
	}
	return nil, fmt.Errorf("skills: marshal %T: %w", d, ErrUnsupported)
}

// Unmarshal decodes data written by Marshal (or either MarshalBinary) and
// returns a *VMF or a *Softmax. It returns an error wrapping ErrCorrupt if
// data is malformed.
func Unmarshal(data []byte) (Discriminator, error) {
	h, err := openData("skills: unmarshal", data)
	if err != nil {
		return nil, err
	}
	if h.kind == kindVMF {
		v, err := h.vmf()
		if err != nil {
			return nil, err
		}
		return v, nil
	}
	c, err := h.softmax()
	if err != nil {
		return nil, err
	}
	return c, nil
}

// Save writes Marshal(d) to path atomically: into a temporary file in the
// same directory, synced, then renamed over path, so a crash leaves either
// the old file or the new one. The file has mode 0644.
func Save(path string, d Discriminator) error {
	b, err := Marshal(d)
	if err != nil {
		return fmt.Errorf("skills: save: %w", err)
	}
	if err := fileio.WriteAtomic(path, b, fileio.FileMode); err != nil {
		return fmt.Errorf("skills: save: %w", err)
	}
	return nil
}

// Load reads a discriminator written by Save. A truncated, altered or
// foreign file gives an error wrapping ErrCorrupt; a file that cannot be
// read gives the os error.
func Load(path string) (Discriminator, error) {
	b, err := fileio.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("skills: load: %w", err)
	}
	d, err := Unmarshal(b)
	if err != nil {
		return nil, fmt.Errorf("skills: load %s: %w", path, err)
	}
	return d, nil
}
