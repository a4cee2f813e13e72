package skills

import (
	"encoding/binary"
	"fmt"
	"hash/crc32"
	"math"
	"math/rand/v2"
	"os"

	"github.com/successor-go/successor/internal/fileio"
)

// Binary format of a discriminator (versions 1 and 2), little-endian
// throughout:
//
//	magic      4 bytes "SKDS"
//	version    uint32: 1 for dense Adam, 2 for any other optimiser
//	kind       uint8: 1 = VMF, 2 = Softmax
//	in         uint32   observation length
//	zdim       uint32   d (VMF) or K (Softmax)
//	layers     uint32   number of hidden layers h
//	hidden     h x uint32 widths
//	tanh       uint8 (0 or 1)
//	maxBatch   uint32   Net.MaxBatch as configured
//	optim      5 x float64: learn rate, beta1, beta2, eps, clip norm
//	method     version 2 only: uint8 OptimMethod, never 0 (OptimAdam)
//	steps      uint64   updates taken
//	VMF only:  learnKappa uint8 (0 or 1), maxKappa float64, kappa float64
//	           (log kappa when learned), kappa Adam step uint64, moments
//	           m, v float64
//	params     uint64 count P, then P x float64 (layer by layer, W then b)
//	adam       step uint64, P x float64 first moments, P x float64 second
//	crc        uint32 CRC-32 (IEEE) of every byte before it
//
// Floats are stored as their IEEE-754 bits, so a round trip is bit-exact;
// the loader accepts only finite values and rejects trailing bytes, so
// MarshalBinary of a loaded value reproduces its input. Dense Adam is
// written as version 1, unchanged, so files written before sparse Adam
// existed load as they are and discriminators that do not use it write the
// same bytes as before; version 2 adds the method byte, and a version 2
// file naming dense Adam is rejected (its encoding is version 1). The sparse
// optimiser keeps the same state as dense Adam (global step, moments).

const (
	fileMagic   = "SKDS"
	fileVersion = 2
	kindVMF     = 1
	kindSoftmax = 2
)

type enc []byte

func (b enc) u8(v uint8) enc    { return append(b, v) }
func (b enc) u32(v int) enc     { return binary.LittleEndian.AppendUint32(b, uint32(v)) }
func (b enc) u64(v uint64) enc  { return binary.LittleEndian.AppendUint64(b, v) }
func (b enc) f64(v float64) enc { return b.u64(math.Float64bits(v)) }
func (b enc) floats(v []float64) enc {
	for _, x := range v {
		b = b.f64(x)
	}
	return b
}
func (b enc) flag(v bool) enc {
	if v {
		return b.u8(1)
	}
	return b.u8(0)
}

type dec struct {
	b   []byte
	bad bool
}

func (d *dec) take(n int) []byte {
	if d.bad || n > len(d.b) {
		d.bad = true
		return make([]byte, n)
	}
	p := d.b[:n]
	d.b = d.b[n:]
	return p
}
func (d *dec) u8() uint8    { return d.take(1)[0] }
func (d *dec) u32() int     { return int(binary.LittleEndian.Uint32(d.take(4))) }
func (d *dec) u64() uint64  { return binary.LittleEndian.Uint64(d.take(8)) }
func (d *dec) f64() float64 { return math.Float64frombits(d.u64()) }
func (d *dec) flag() bool {
	v := d.u8()
	if v > 1 {
		d.bad = true
	}
	return v == 1
}
func (d *dec) floats(dst []float64) {
	for i := range dst {
		dst[i] = d.f64()
	}
}

func appendHeader(b enc, kind uint8, c *core, in, zdim int, net *Net) enc {
	b = append(b, fileMagic...)
	version := 1
	if c.opt.Method != OptimAdam {
		version = 2
	}
	b = b.u32(version).u8(kind).u32(in).u32(zdim).u32(len(net.Hidden))
	for _, h := range net.Hidden {
		b = b.u32(h)
	}
	b = b.flag(net.Tanh).u32(net.MaxBatch)
	o := c.opt
	b = b.f64(o.LearnRate).f64(o.Beta1).f64(o.Beta2).f64(o.Eps).f64(o.ClipNorm)
	if version == 2 {
		b = b.u8(uint8(o.Method))
	}
	return b.u64(uint64(c.steps))
}

func appendWeights(b enc, c *core) enc {
	p := c.enc.params()
	b = b.u64(uint64(len(p))).floats(p)
	return b.u64(uint64(c.adam.T)).floats(c.adam.M).floats(c.adam.V)
}

func seal(b enc) []byte {
	return binary.LittleEndian.AppendUint32(b, crc32.ChecksumIEEE(b))
}

// MarshalBinary encodes v exactly: configuration, weights, kappa and
// optimiser state (format in marshal.go). It never fails.
func (v *VMF) MarshalBinary() ([]byte, error) {
	b := appendHeader(nil, kindVMF, &v.core, v.InDim(), v.dim, &v.net)
	b = b.flag(v.learn).f64(v.maxKappa)
	if v.learn {
		b = b.f64(v.rho[0])
	} else {
		b = b.f64(v.kappa)
	}
	b = b.u64(uint64(v.kadam.T)).f64(v.kadam.M[0]).f64(v.kadam.V[0])
	return seal(appendWeights(b, &v.core)), nil
}

// MarshalBinary encodes c exactly: configuration, weights and optimiser
// state (format in marshal.go). It never fails.
func (c *Softmax) MarshalBinary() ([]byte, error) {
	b := appendHeader(nil, kindSoftmax, &c.core, c.InDim(), c.k, &c.net)
	return seal(appendWeights(b, &c.core)), nil
}

// header is the decoded common part of a saved discriminator.
type header struct {
	kind      uint8
	in, zdim  int
	net       Net
	opt       Optim
	steps     uint64
	learn     bool
	maxKappa  float64
	kappa     float64
	kt        uint64
	km, kv    float64
	remaining *dec
}

func openData(data []byte) (*header, error) {
	if len(data) < len(fileMagic)+4+4 {
		return nil, fmt.Errorf("%d bytes: %w", len(data), ErrCorrupt)
	}
	if string(data[:len(fileMagic)]) != fileMagic {
		return nil, fmt.Errorf("magic %q: %w", data[:len(fileMagic)], ErrCorrupt)
	}
	body := data[:len(data)-4]
	if got, want := binary.LittleEndian.Uint32(data[len(data)-4:]), crc32.ChecksumIEEE(body); got != want {
		return nil, fmt.Errorf("crc %08x, computed %08x: %w", got, want, ErrCorrupt)
	}
	d := &dec{b: body[len(fileMagic):]}
	version := d.u32()
	if version < 1 || version > fileVersion {
		return nil, fmt.Errorf("version %d (this code reads 1 to %d): %w", version, fileVersion, ErrCorrupt)
	}
	h := &header{remaining: d}
	h.kind = d.u8()
	h.in, h.zdim = d.u32(), d.u32()
	nh := d.u32()
	if d.bad || nh > maxHiddenLayers {
		return nil, fmt.Errorf("%d hidden layers: %w", nh, ErrCorrupt)
	}
	if nh > 0 {
		h.net.Hidden = make([]int, nh)
		for i := range h.net.Hidden {
			h.net.Hidden[i] = d.u32()
		}
	}
	h.net.Tanh = d.flag()
	h.net.MaxBatch = d.u32()
	h.opt = Optim{LearnRate: d.f64(), Beta1: d.f64(), Beta2: d.f64(), Eps: d.f64(), ClipNorm: d.f64()}
	if version == 2 {
		h.opt.Method = OptimMethod(d.u8())
		if !d.bad && h.opt.Method == OptimAdam {
			return nil, fmt.Errorf("version 2 with dense adam, which is written as version 1: %w", ErrCorrupt)
		}
	}
	h.steps = d.u64()
	if h.kind == kindVMF {
		h.learn = d.flag()
		h.maxKappa, h.kappa = d.f64(), d.f64()
		h.kt, h.km, h.kv = d.u64(), d.f64(), d.f64()
	}
	if d.bad {
		return nil, fmt.Errorf("truncated header: %w", ErrCorrupt)
	}
	if h.kind != kindVMF && h.kind != kindSoftmax {
		return nil, fmt.Errorf("kind %d: %w", h.kind, ErrCorrupt)
	}
	if h.steps > math.MaxInt32 || h.kt > math.MaxInt32 {
		return nil, fmt.Errorf("step count %d: %w", max(h.steps, h.kt), ErrCorrupt)
	}
	if err := h.net.check(); err != nil {
		return nil, fmt.Errorf("%v: %w", err, ErrCorrupt)
	}
	if h.in < 1 || h.in > maxWidth || h.zdim < 1 || h.zdim > maxWidth {
		return nil, fmt.Errorf("sizes %d, %d: %w", h.in, h.zdim, ErrCorrupt)
	}
	// The parameter count follows from the shape; check it against the
	// bytes left before allocating anything of that size.
	var np uint64
	prev := uint64(h.in)
	for _, w := range append(append([]int(nil), h.net.Hidden...), h.zdim) {
		np += prev*uint64(w) + uint64(w)
		prev = uint64(w)
	}
	if uint64(len(d.b)) != 8+8*np+8+16*np {
		return nil, fmt.Errorf("%d bytes left for %d parameters: %w", len(d.b), np, ErrCorrupt)
	}
	return h, nil
}

// readWeights fills the encoder parameters and Adam state of c.
func (h *header) readWeights(c *core) error {
	d := h.remaining
	p := c.enc.params()
	if n := d.u64(); n != uint64(len(p)) {
		return fmt.Errorf("%d parameters, shape has %d: %w", n, len(p), ErrCorrupt)
	}
	d.floats(p)
	t := d.u64()
	d.floats(c.adam.M)
	d.floats(c.adam.V)
	if d.bad || len(d.b) != 0 || t > math.MaxInt32 {
		return fmt.Errorf("weights: %w", ErrCorrupt)
	}
	c.adam.T = int(t)
	if !allFinite(p) || !allFinite(c.adam.M) || !allFinite(c.adam.V) {
		return fmt.Errorf("weights: %w", ErrNonFinite)
	}
	c.steps = int(h.steps)
	return nil
}

// loadRNG seeds the throwaway initialisation of a network whose weights are
// about to be overwritten.
func loadRNG() *rand.Rand { return rand.New(rand.NewPCG(0, 0)) }

func (h *header) vmf() (*VMF, error) {
	if h.kind != kindVMF {
		return nil, fmt.Errorf("kind %d is not vmf: %w", h.kind, ErrCorrupt)
	}
	if !isFinite(h.maxKappa) || !isFinite(h.kappa) || !isFinite(h.km) || !isFinite(h.kv) {
		return nil, fmt.Errorf("kappa: %w", ErrNonFinite)
	}
	c := VMFConfig{In: h.in, Dim: h.zdim, Net: h.net, Kappa: h.kappa, LearnKappa: h.learn, MaxKappa: h.maxKappa, Optim: h.opt}
	if h.learn {
		if !(h.kappa >= math.Log(minKappa) && h.kappa <= math.Log(h.maxKappa)) {
			return nil, fmt.Errorf("log kappa %g: %w", h.kappa, ErrCorrupt)
		}
		c.Kappa = min(max(math.Exp(h.kappa), minKappa), c.MaxKappa) // for the range check only
	}
	v, err := buildVMF(&c, loadRNG())
	if err != nil {
		return nil, fmt.Errorf("%v: %w", err, ErrCorrupt)
	}
	if h.learn {
		v.rho[0] = h.kappa
		v.kappa = math.Exp(h.kappa)
		v.logNorm = VMFLogNorm(v.dim, v.kappa)
	}
	v.kadam.T, v.kadam.M[0], v.kadam.V[0] = int(h.kt), h.km, h.kv
	if err := h.readWeights(&v.core); err != nil {
		return nil, err
	}
	return v, nil
}

func (h *header) softmax() (*Softmax, error) {
	if h.kind != kindSoftmax {
		return nil, fmt.Errorf("kind %d is not softmax: %w", h.kind, ErrCorrupt)
	}
	c := SoftmaxConfig{In: h.in, K: h.zdim, Net: h.net, Optim: h.opt}
	s, err := buildSoftmax(&c, loadRNG())
	if err != nil {
		return nil, fmt.Errorf("%v: %w", err, ErrCorrupt)
	}
	if err := h.readWeights(&s.core); err != nil {
		return nil, err
	}
	return s, nil
}

// UnmarshalBinary replaces v with the VMF discriminator encoded by
// MarshalBinary. It returns an error wrapping ErrCorrupt, ErrCorrupt,
// ErrCorrupt or ErrNonFinite if data is malformed, in which case v is
// unchanged.
func (v *VMF) UnmarshalBinary(data []byte) error {
	h, err := openData(data)
	if err != nil {
		return fmt.Errorf("skills: load vmf: %w", err)
	}
	w, err := h.vmf()
	if err != nil {
		return fmt.Errorf("skills: load vmf: %w", err)
	}
	*v = *w
	return nil
}

// UnmarshalBinary replaces c with the Softmax discriminator encoded by
// MarshalBinary. It returns an error wrapping ErrCorrupt, ErrCorrupt,
// ErrCorrupt or ErrNonFinite if data is malformed, in which case c is
// unchanged.
func (c *Softmax) UnmarshalBinary(data []byte) error {
	h, err := openData(data)
	if err != nil {
		return fmt.Errorf("skills: load softmax: %w", err)
	}
	s, err := h.softmax()
	if err != nil {
		return fmt.Errorf("skills: load softmax: %w", err)
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
// returns a *VMF or a *Softmax. It returns an error wrapping ErrCorrupt,
// ErrCorrupt, ErrCorrupt or ErrNonFinite if data is malformed.
func Unmarshal(data []byte) (Discriminator, error) {
	h, err := openData(data)
	if err != nil {
		return nil, fmt.Errorf("skills: unmarshal: %w", err)
	}
	var d Discriminator
	if h.kind == kindVMF {
		d, err = h.vmf()
	} else {
		d, err = h.softmax()
	}
	if err != nil {
		return nil, fmt.Errorf("skills: unmarshal: %w", err)
	}
	return d, nil
}

// Save writes Marshal(d) to path atomically: into a temporary file in the
// same directory, synced, then renamed over path, so a crash leaves either
// the old file or the new one. The file has mode 0600.
func Save(path string, d Discriminator) error {
	b, err := Marshal(d)
	if err != nil {
		return fmt.Errorf("skills: save: %w", err)
	}
	if err := fileio.WriteAtomic(path, b, 0o600); err != nil {
		return fmt.Errorf("skills: save: %w", err)
	}
	return nil
}

// Load reads a discriminator written by Save.
func Load(path string) (Discriminator, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("skills: load: %w", err)
	}
	d, err := Unmarshal(b)
	if err != nil {
		return nil, fmt.Errorf("skills: load %s: %w", path, err)
	}
	return d, nil
}
