package usf

import (
	"encoding/binary"
	"fmt"
	"hash/crc32"
	"math"

	"github.com/successor-go/successor/internal/nn"
)

// Magics of the binary encodings (version 1 each; layouts in the
// MarshalBinary doc comments). Every encoding ends with a CRC-32 (IEEE) of
// all the bytes before it; integers and float64 bits are little-endian.
const (
	tabularMagic = "USTB"
	linearMagic  = "USLN"
	neuralMagic  = "USNN"
	replayMagic  = "USRP"
	binVersion   = 1
	maxFloats    = 1 << 28 // largest slice a loader accepts
)

// replayLoadWords bounds the buffers a Replay loader allocates: capacity x
// (5 + 2 obs + 2 d, +1 with d = 0) words of 8 bytes, at most 2^28 words
// (2 GiB). The capacity comes from the file and is allocated up front (so
// that Add stays allocation-free after a load); the bound keeps a corrupt
// header that still carries a valid checksum from asking for more. Tests
// lower it to keep fuzzing cheap.
var replayLoadWords = uint64(maxFloats)

type encoder struct{ b []byte }

func newEncoder(magic string) *encoder {
	e := &encoder{b: append([]byte(nil), magic...)}
	e.u64(binVersion)
	return e
}

func (e *encoder) u64(v uint64) { e.b = binary.LittleEndian.AppendUint64(e.b, v) }
func (e *encoder) int(v int)    { e.u64(uint64(int64(v))) }
func (e *encoder) f64(v float64) {
	e.u64(math.Float64bits(v))
}
func (e *encoder) floats(v []float64) {
	e.int(len(v))
	for _, x := range v {
		e.f64(x)
	}
}
func (e *encoder) ints(v []int) {
	e.int(len(v))
	for _, x := range v {
		e.int(x)
	}
}
func (e *encoder) bools(v []bool) {
	e.int(len(v))
	for _, x := range v {
		if x {
			e.b = append(e.b, 1)
		} else {
			e.b = append(e.b, 0)
		}
	}
}
func (e *encoder) bytes(v []byte) {
	e.int(len(v))
	e.b = append(e.b, v...)
}
func (e *encoder) seal() []byte {
	return binary.LittleEndian.AppendUint32(e.b, crc32.ChecksumIEEE(e.b))
}

type decoder struct {
	b   []byte
	bad bool
}

// openDecoder checks magic, checksum and version.
func openDecoder(data []byte, magic, what string) (*decoder, error) {
	if len(data) < len(magic)+12 || string(data[:len(magic)]) != magic {
		return nil, fmt.Errorf("usf: load %s: bad header: %w", what, ErrCorrupt)
	}
	body := data[:len(data)-4]
	if crc32.ChecksumIEEE(body) != binary.LittleEndian.Uint32(data[len(data)-4:]) {
		return nil, fmt.Errorf("usf: load %s: checksum mismatch: %w", what, ErrCorrupt)
	}
	d := &decoder{b: body[len(magic):]}
	if v := d.u64(); v != binVersion {
		return nil, fmt.Errorf("usf: load %s: version %d, want %d: %w", what, v, binVersion, ErrCorrupt)
	}
	return d, nil
}

func (d *decoder) take(n int) []byte {
	if d.bad || n < 0 || n > len(d.b) {
		d.bad = true
		return nil
	}
	v := d.b[:n]
	d.b = d.b[n:]
	return v
}
func (d *decoder) u64() uint64 {
	v := d.take(8)
	if v == nil {
		return 0
	}
	return binary.LittleEndian.Uint64(v)
}
func (d *decoder) int() int {
	v := int64(d.u64())
	if v < math.MinInt || v > math.MaxInt {
		d.bad = true
		return 0
	}
	return int(v)
}

// size reads a dimension in [lo, maxFloats].
func (d *decoder) size(lo int) int {
	v := d.int()
	if v < lo || v > maxFloats {
		d.bad = true
		return lo
	}
	return v
}

// fits reports whether the product of dims is at most maxFloats.
func fits(dims ...int) bool {
	p := uint64(1)
	for _, v := range dims {
		if v < 0 {
			return false
		}
		p *= uint64(v)
		if p > maxFloats {
			return false
		}
	}
	return true
}
func (d *decoder) f64() float64 { return math.Float64frombits(d.u64()) }

// length reads a slice length, at most max and at most what the bytes left
// can hold at size bytes per element.
func (d *decoder) length(size int) int {
	n := d.int()
	if n < 0 || n > maxFloats || n*size > len(d.b) {
		d.bad = true
		return 0
	}
	return n
}
func (d *decoder) floats() []float64 {
	n := d.length(8)
	if d.bad {
		return nil
	}
	v := make([]float64, n)
	for i := range v {
		v[i] = d.f64()
	}
	return v
}
func (d *decoder) ints() []int {
	n := d.length(8)
	if d.bad {
		return nil
	}
	v := make([]int, n)
	for i := range v {
		v[i] = d.int()
	}
	return v
}
func (d *decoder) bools() []bool {
	n := d.length(1)
	raw := d.take(n)
	if d.bad {
		return nil
	}
	v := make([]bool, n)
	for i, c := range raw {
		if c > 1 {
			d.bad = true
		}
		v[i] = c == 1
	}
	return v
}
func (d *decoder) bytes() []byte {
	n := d.length(1)
	return d.take(n)
}

// done reports a decoding failure: short data, trailing bytes or a bad
// field.
func (d *decoder) done(what string) error {
	if d.bad || len(d.b) != 0 {
		return fmt.Errorf("usf: load %s: malformed data: %w", what, ErrCorrupt)
	}
	return nil
}

func corrupt(what, why string) error {
	return fmt.Errorf("usf: load %s: %s: %w", what, why, ErrCorrupt)
}

func finite(v ...float64) bool {
	for _, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return false
		}
	}
	return true
}

// MarshalBinary encodes t exactly: magic "USTB", version, states,
// actions, d, K, gamma, alpha, power, steps, the K vectors z, the K tables,
// the visit counts, CRC-32.
func (t *Tabular) MarshalBinary() ([]byte, error) {
	s, a, d := t.Shape()
	e := newEncoder(tabularMagic)
	e.int(s)
	e.int(a)
	e.int(d)
	e.int(len(t.Z))
	e.f64(t.gamma)
	e.f64(t.alpha)
	e.f64(t.power)
	e.int(t.steps)
	for k := range t.Z {
		e.floats(t.Z[k])
		e.floats(t.Tables[k].Data)
	}
	e.floats(t.visits)
	return e.seal(), nil
}

// UnmarshalBinary replaces t with the approximator encoded by
// MarshalBinary. A divergence error is not saved. It returns an error
// wrapping ErrCorrupt for malformed data, leaving t unchanged.
func (t *Tabular) UnmarshalBinary(data []byte) error {
	const what = "tabular"
	dec, err := openDecoder(data, tabularMagic, what)
	if err != nil {
		return err
	}
	ns, na, d, nz := dec.size(1), dec.size(1), dec.size(1), dec.size(1)
	gamma, alpha, power := dec.f64(), dec.f64(), dec.f64()
	steps := dec.int()
	if dec.bad || !fits(ns, na, d) || !fits(nz, d) || steps < 0 {
		return corrupt(what, "bad sizes")
	}
	if !(gamma >= 0 && gamma <= 1) || !(alpha >= 0 && alpha <= 1) || !(power >= 0 && power <= 1) {
		return corrupt(what, "bad settings")
	}
	zs := make([][]float64, 0, min(nz, 1024))
	var datas [][]float64
	for k := 0; k < nz && !dec.bad; k++ {
		z := dec.floats()
		tab := dec.floats()
		if len(z) != d || len(tab) != ns*na*d || !finite(z...) {
			return corrupt(what, "bad z or table")
		}
		zs = append(zs, z)
		datas = append(datas, tab)
	}
	visits := dec.floats()
	if err := dec.done(what); err != nil {
		return err
	}
	if (power > 0) != (len(visits) > 0) || (power > 0 && len(visits) != nz*ns*na) {
		return corrupt(what, "bad visit counts")
	}
	n, err := NewTabular(ns, na, zs, gamma, nil)
	if err != nil {
		return corrupt(what, err.Error())
	}
	n.alpha, n.power, n.steps = alpha, power, steps
	for k := range datas {
		copy(n.Tables[k].Data, datas[k])
	}
	if power > 0 {
		n.visits = visits
	}
	*t = *n
	return nil
}

// MarshalBinary encodes l exactly: magic "USLN", version, obs, actions, d,
// affine (0/1), gamma, Alpha, steps, W, CRC-32.
func (l *Linear) MarshalBinary() ([]byte, error) {
	e := newEncoder(linearMagic)
	e.int(l.obs)
	e.int(l.na)
	e.int(l.d)
	aff := 0
	if l.Affine() {
		aff = 1
	}
	e.int(aff)
	e.f64(l.gamma)
	e.f64(l.Alpha)
	e.int(l.steps)
	e.floats(l.W)
	return e.seal(), nil
}

// UnmarshalBinary replaces l with the approximator encoded by
// MarshalBinary. It returns an error wrapping ErrCorrupt for malformed
// data, leaving l unchanged.
func (l *Linear) UnmarshalBinary(data []byte) error {
	const what = "linear"
	dec, err := openDecoder(data, linearMagic, what)
	if err != nil {
		return err
	}
	obs, na, d, aff := dec.size(1), dec.size(1), dec.size(1), dec.int()
	gamma, alpha := dec.f64(), dec.f64()
	steps := dec.int()
	w := dec.floats()
	if err := dec.done(what); err != nil {
		return err
	}
	if aff != 0 && aff != 1 || steps < 0 {
		return corrupt(what, "bad header")
	}
	e := d + aff
	if !fits(obs, na, d, e) || obs*na*d*e != len(w) {
		return corrupt(what, "weights do not match the shape")
	}
	n, err := NewLinear(obs, na, d, gamma, &LinearConfig{Affine: aff == 1})
	if err != nil || !finite(alpha) {
		return corrupt(what, "bad settings")
	}
	n.Alpha = alpha
	n.W = w
	n.steps = steps
	*l = *n
	return nil
}

// MarshalBinary encodes u exactly: magic "USNN", version, obs, actions, d,
// gamma, clip, target period, tau, online selection (0/1), updates, then length-prefixed the
// online network, the target network and the Adam state (their own
// checksummed formats, package internal/nn), CRC-32.
func (u *Neural) MarshalBinary() ([]byte, error) {
	e := newEncoder(neuralMagic)
	e.int(u.obs)
	e.int(u.na)
	e.int(u.d)
	e.f64(u.gamma)
	e.f64(u.clip)
	e.int(u.targetEvery)
	e.f64(u.tau)
	onl := 0
	if u.online {
		onl = 1
	}
	e.int(onl)
	e.int(u.updates)
	for _, m := range []interface{ MarshalBinary() ([]byte, error) }{u.net, u.target, u.opt} {
		b, err := m.MarshalBinary()
		if err != nil {
			return nil, fmt.Errorf("usf: save neural: %w", err)
		}
		e.bytes(b)
	}
	return e.seal(), nil
}

// UnmarshalBinary replaces u with the approximator encoded by
// MarshalBinary. It returns an error wrapping ErrCorrupt for malformed
// data, leaving u unchanged.
func (u *Neural) UnmarshalBinary(data []byte) error {
	const what = "neural"
	dec, err := openDecoder(data, neuralMagic, what)
	if err != nil {
		return err
	}
	n := &Neural{}
	n.obs, n.na, n.d = dec.size(1), dec.size(1), dec.size(1)
	n.gamma, n.clip = dec.f64(), dec.f64()
	n.targetEvery = dec.int()
	n.tau = dec.f64()
	onl := dec.int()
	n.online = onl == 1
	n.updates = dec.int()
	bnet, btgt, bopt := dec.bytes(), dec.bytes(), dec.bytes()
	if err := dec.done(what); err != nil {
		return err
	}
	if n.obs <= 0 || n.na <= 0 || n.d <= 0 || n.updates < 0 || n.targetEvery <= 0 || (onl != 0 && onl != 1) ||
		!(n.gamma >= 0 && n.gamma <= 1) || !(n.tau >= 0 && n.tau <= 1) || math.IsNaN(n.clip) {
		return corrupt(what, "bad settings")
	}
	n.net, n.target, n.opt = new(nn.MLP), new(nn.MLP), new(nn.Adam)
	if err := n.net.UnmarshalBinary(bnet); err != nil {
		return corrupt(what, err.Error())
	}
	if err := n.target.UnmarshalBinary(btgt); err != nil {
		return corrupt(what, err.Error())
	}
	if err := n.opt.UnmarshalBinary(bopt); err != nil {
		return corrupt(what, err.Error())
	}
	if n.net.In() != n.obs+n.d || n.net.Out() != n.na*n.d || !n.net.SameShape(n.target) ||
		n.target.MaxBatch() != n.net.MaxBatch() || len(n.opt.M) != n.net.NumParams() {
		return corrupt(what, "networks do not match the shape")
	}
	n.alloc()
	*u = *n
	return nil
}

// MarshalBinary encodes r exactly: magic "USRP", version, capacity, obs, d,
// size, head, added, then the stored part (the first size slots) of the
// states, actions, next states, next actions, terminal flags, the set
// indices (only when d = 0), observations, next observations, features
// and z (empty when d = 0), CRC-32.
func (r *Replay) MarshalBinary() ([]byte, error) {
	e := newEncoder(replayMagic)
	e.int(r.capacity)
	e.int(r.obs)
	e.int(r.d)
	e.int(r.size)
	e.int(r.head)
	e.int(r.added)
	n := r.size
	e.ints(r.s[:n])
	e.ints(r.a[:n])
	e.ints(r.next[:n])
	e.ints(r.nextA[:n])
	e.bools(r.term[:n])
	if r.d == 0 {
		e.ints(r.k[:n])
	}
	e.floats(r.x[:n*r.obs])
	e.floats(r.nx[:n*r.obs])
	e.floats(r.phi[:n*r.d])
	e.floats(r.z[:n*r.d])
	return e.seal(), nil
}

// UnmarshalBinary replaces r with the replay encoded by MarshalBinary. It
// returns an error wrapping ErrCorrupt for malformed data, leaving r
// unchanged.
func (r *Replay) UnmarshalBinary(data []byte) error {
	const what = "replay"
	dec, err := openDecoder(data, replayMagic, what)
	if err != nil {
		return err
	}
	c, obs, d := dec.size(1), dec.size(0), dec.size(0)
	size, head, added := dec.int(), dec.int(), dec.int()
	if dec.bad || size < 0 || size > c || head < 0 || head >= c || added < size ||
		(size < c && head != size) || !fits(c, max(obs, d)) ||
		!fits(c, 6+2*obs+2*d) || uint64(c)*uint64(6+2*obs+2*d) > replayLoadWords {
		return corrupt(what, "bad header")
	}
	s, a, next, nextA := dec.ints(), dec.ints(), dec.ints(), dec.ints()
	term := dec.bools()
	var k []int
	if d == 0 {
		k = dec.ints()
	}
	x, nx, phi, z := dec.floats(), dec.floats(), dec.floats(), dec.floats()
	if err := dec.done(what); err != nil {
		return err
	}
	if len(s) != size || len(a) != size || len(next) != size || len(nextA) != size || len(term) != size ||
		len(x) != size*obs || len(nx) != size*obs || len(phi) != size*d || len(z) != size*d ||
		(d == 0 && len(k) != size) {
		return corrupt(what, "lengths do not match the size")
	}
	n := &Replay{capacity: c, obs: obs, d: d, size: size, head: head, added: added}
	n.alloc()
	copy(n.s, s)
	copy(n.a, a)
	copy(n.next, next)
	copy(n.nextA, nextA)
	copy(n.term, term)
	copy(n.k, k)
	copy(n.x, x)
	copy(n.nx, nx)
	copy(n.phi, phi)
	copy(n.z, z)
	*r = *n
	return nil
}
