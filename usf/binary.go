package usf

import (
	"fmt"
	"math"

	"github.com/successor-go/successor/internal/fileio"
	"github.com/successor-go/successor/internal/nn"
)

// Record kinds and format version of the binary encodings (the library's
// framing, package internal/fileio: magic, uint32 version, payload length,
// payload, CRC-32C; payloads in the MarshalBinary doc comments, integers
// as int64 and floats as their IEEE-754 bits, little-endian). Version 1
// was this package's own framing. The magic "USLN" belonged to a linear
// approximator that was removed; it is not reused.
const (
	tabularMagic = "USTB"
	neuralMagic  = "USNN"
	replayMagic  = "USRP"
	binVersion   = 2
)

// replayLoadWords bounds the buffers a Replay loader allocates: capacity x
// (6 + 2 obs + 2 d) words of 8 bytes, at most 2^28 words (2 GiB). The
// capacity comes from the file and is allocated up front (so that Add
// stays allocation-free after a load), beyond the transitions the file
// holds; the bound keeps a corrupt header that still carries a valid
// checksum from asking for more. Tests lower it to keep fuzzing cheap.
var replayLoadWords = uint64(1 << 28)

func seal(what string, e *fileio.Encoder) ([]byte, error) {
	b, err := e.Seal()
	if err != nil {
		return nil, fmt.Errorf("usf: save %s: %w", what, err)
	}
	return b, nil
}

func finite(v ...float64) bool {
	for _, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return false
		}
	}
	return true
}

// MarshalBinary encodes t exactly. Payload (magic "USTB"): states,
// actions, d, K, gamma, alpha, power, steps, the K vectors z (K x d), the
// K tables (K x states x actions x d, in the order of sf.Table.Data), and,
// when power > 0, the visit counts (K x states x actions).
//
// A diverged t (Err not nil) is not encoded: the error wraps ErrDiverged,
// since a loaded copy would not know it diverged. A table value that is
// NaN or infinite is an error wrapping ErrNonFinite.
func (t *Tabular) MarshalBinary() ([]byte, error) {
	if t.err != nil {
		return nil, fmt.Errorf("usf: save tabular: %w", t.err)
	}
	for k, tab := range t.Tables {
		if !finite(tab.Data...) {
			return nil, fmt.Errorf("usf: save tabular: table of z %d: %w", k, ErrNonFinite)
		}
	}
	s := t.ObsDim()
	a, d := t.Shape()
	k := len(t.Z)
	e := fileio.NewEncoder(tabularMagic, binVersion, 8*(8+k*d+k*s*a*d+len(t.visits)))
	e.Int(s)
	e.Int(a)
	e.Int(d)
	e.Int(k)
	e.Float64(t.gamma)
	e.Float64(t.alpha)
	e.Float64(t.power)
	e.Int(t.steps)
	for _, z := range t.Z {
		e.Float64s(z)
	}
	for _, tab := range t.Tables {
		e.Float64s(tab.Data)
	}
	e.Float64s(t.visits)
	return seal("tabular", e)
}

// UnmarshalBinary replaces t with the approximator encoded by
// MarshalBinary. It returns an error wrapping ErrCorrupt for malformed
// data (a bad frame, sizes beyond the bytes present, settings out of
// range, a non-finite z or table value, negative, fractional or
// non-finite visit counts), leaving t unchanged. Sizes are checked against
// the bytes present before anything of their size is allocated.
func (t *Tabular) UnmarshalBinary(data []byte) error {
	d, err := fileio.Open("usf: load tabular", data, tabularMagic, binVersion)
	if err != nil {
		return err
	}
	ns, na := d.Size("states", 1, math.MaxInt), d.Size("actions", 1, math.MaxInt)
	dim, nz := d.Size("d", 1, math.MaxInt), d.Size("K", 1, math.MaxInt)
	gamma, alpha, power := d.Float64("gamma"), d.Float64("alpha"), d.Float64("power")
	steps := d.Size("steps", 0, math.MaxInt)
	// The tables alone hold K x states x actions x d values: check that
	// they are there before allocating anything.
	d.Count("tables", 8, nz, ns, na, dim)
	if err := d.Err(); err != nil {
		return err
	}
	if !(gamma >= 0 && gamma <= 1) || !(alpha >= 0 && alpha <= 1) || !(power >= 0 && power <= 1) {
		return d.Fail("settings", "gamma %v, alpha %v, power %v not in [0, 1]", gamma, alpha, power)
	}
	zs := make([][]float64, nz)
	for k := range zs {
		zs[k] = d.Float64s("z", dim)
	}
	if err := d.Err(); err != nil {
		return err
	}
	n, err := NewTabular(ns, na, zs, gamma, nil)
	if err != nil {
		return d.Fail("sizes or z", "%v", err)
	}
	for k, tab := range n.Tables {
		d.ReadFloat64s("tables", tab.Data)
		if d.Err() == nil && !finite(tab.Data...) {
			return d.Fail("tables", "table of z %d holds a NaN or an infinity", k)
		}
	}
	var visits []float64
	if power > 0 {
		visits = d.Float64s("visits", d.Count("visits", 8, nz, ns, na))
		for _, v := range visits {
			if !(v >= 0 && v == math.Trunc(v) && v < math.Inf(1)) {
				return d.Fail("visits", "count %v is not a whole number >= 0", v)
			}
		}
	}
	if err := d.Finish(); err != nil {
		return err
	}
	n.alpha, n.power, n.steps, n.visits = alpha, power, steps, visits
	*t = *n
	return nil
}

// MarshalBinary encodes u exactly. Payload (magic "USNN"): obs, actions,
// d, gamma, clip, target period, tau, online selection (one byte),
// updates, then, each preceded by its length in bytes, the online network,
// the target network and the Adam state (records of package internal/nn,
// each with its own frame and checksum).
func (u *Neural) MarshalBinary() ([]byte, error) {
	var blobs [3][]byte
	size := 8*3 + 8*2 + 8 + 8 + 1 + 8
	for i, m := range []interface{ MarshalBinary() ([]byte, error) }{u.net, u.target, u.opt} {
		b, err := m.MarshalBinary()
		if err != nil {
			return nil, fmt.Errorf("usf: save neural: %w", err)
		}
		blobs[i] = b
		size += 8 + len(b)
	}
	e := fileio.NewEncoder(neuralMagic, binVersion, size)
	e.Int(u.obs)
	e.Int(u.na)
	e.Int(u.d)
	e.Float64(u.gamma)
	e.Float64(u.clip)
	e.Int(u.targetEvery)
	e.Float64(u.tau)
	e.Bool(u.online)
	e.Int(u.updates)
	for _, b := range blobs {
		e.Int(len(b))
		e.Bytes(b)
	}
	return seal("neural", e)
}

// UnmarshalBinary replaces u with the approximator encoded by
// MarshalBinary. It returns an error wrapping ErrCorrupt for malformed
// data, leaving u unchanged.
func (u *Neural) UnmarshalBinary(data []byte) error {
	d, err := fileio.Open("usf: load neural", data, neuralMagic, binVersion)
	if err != nil {
		return err
	}
	n := &Neural{}
	n.obs, n.na, n.d = d.Size("obs", 1, math.MaxInt), d.Size("actions", 1, math.MaxInt), d.Size("d", 1, math.MaxInt)
	n.gamma, n.clip = d.Float64("gamma"), d.Float64("clip")
	n.targetEvery = d.Size("target period", 1, math.MaxInt)
	n.tau = d.Float64("tau")
	n.online = d.Bool("online")
	n.updates = d.Size("updates", 0, math.MaxInt)
	bnet := d.Bytes("network", d.Len("network", 1))
	btgt := d.Bytes("target", d.Len("target", 1))
	bopt := d.Bytes("optimiser", d.Len("optimiser", 1))
	if err := d.Finish(); err != nil {
		return err
	}
	if !(n.gamma >= 0 && n.gamma <= 1) || !(n.tau >= 0 && n.tau <= 1) || math.IsNaN(n.clip) {
		return d.Fail("settings", "gamma %v, tau %v, clip %v", n.gamma, n.tau, n.clip)
	}
	n.net, n.target, n.opt = new(nn.MLP), new(nn.MLP), new(nn.Adam)
	if err := n.net.UnmarshalBinary(bnet); err != nil {
		return d.Fail("network", "%v", err)
	}
	if err := n.target.UnmarshalBinary(btgt); err != nil {
		return d.Fail("target", "%v", err)
	}
	if err := n.opt.UnmarshalBinary(bopt); err != nil {
		return d.Fail("optimiser", "%v", err)
	}
	if n.net.In() != n.obs+n.d || n.net.Out() != n.na*n.d || !n.net.SameShape(n.target) ||
		n.target.MaxBatch() != n.net.MaxBatch() || len(n.opt.M) != n.net.NumParams() {
		return d.Fail("networks", "shapes do not match obs %d, actions %d, d %d", n.obs, n.na, n.d)
	}
	n.alloc()
	*u = *n
	return nil
}

// MarshalBinary encodes r exactly. Payload (magic "USRP"): capacity, obs,
// d, size, head, added, then the stored part (the first size slots) of the
// states, actions, next states and next actions (size ints each), the
// terminal flags (size bytes), the set indices (size ints, only when
// d = 0), the observations and next observations (size x obs floats
// each), the features and z (size x d floats each).
func (r *Replay) MarshalBinary() ([]byte, error) {
	n := r.size
	per := 4*8 + 1 + 16*r.obs + 16*r.d
	if r.d == 0 {
		per += 8
	}
	e := fileio.NewEncoder(replayMagic, binVersion, 6*8+n*per)
	e.Int(r.capacity)
	e.Int(r.obs)
	e.Int(r.d)
	e.Int(r.size)
	e.Int(r.head)
	e.Int(r.added)
	e.Ints(r.s[:n])
	e.Ints(r.a[:n])
	e.Ints(r.next[:n])
	e.Ints(r.nextA[:n])
	e.Bools(r.term[:n])
	if r.d == 0 {
		e.Ints(r.k[:n])
	}
	e.Float64s(r.x[:n*r.obs])
	e.Float64s(r.nx[:n*r.obs])
	e.Float64s(r.phi[:n*r.d])
	e.Float64s(r.z[:n*r.d])
	return seal("replay", e)
}

// UnmarshalBinary replaces r with the replay encoded by MarshalBinary. It
// returns an error wrapping ErrCorrupt for malformed data, leaving r
// unchanged. The whole capacity is allocated, as by NewReplay; a capacity
// whose buffers would exceed 2^28 words (2 GiB) is refused as corrupt.
func (r *Replay) UnmarshalBinary(data []byte) error {
	d, err := fileio.Open("usf: load replay", data, replayMagic, binVersion)
	if err != nil {
		return err
	}
	const maxDim = 1 << 28
	c := d.Size("capacity", 1, 1<<30)
	obs, dim := d.Size("obs", 0, maxDim), d.Size("d", 0, maxDim)
	size := d.Size("size", 0, c)
	head := d.Size("head", 0, c-1)
	added := d.Size("added", size, math.MaxInt)
	if err := d.Err(); err != nil {
		return err
	}
	if size < c && head != size {
		return d.Fail("head", "%d with %d of %d slots filled", head, size, c)
	}
	if uint64(c)*uint64(6+2*obs+2*dim) > replayLoadWords {
		return d.Fail("capacity", "%d transitions of obs %d, d %d exceed %d words", c, obs, dim, replayLoadWords)
	}
	per := 4*8 + 1 + 16*obs + 16*dim
	if dim == 0 {
		per += 8
	}
	if d.Count("transitions", per, size) != size || d.Err() != nil {
		return d.Err()
	}
	n := &Replay{capacity: c, obs: obs, d: dim, size: size, head: head, added: added}
	n.alloc()
	d.ReadInts("states", n.s[:size])
	d.ReadInts("actions", n.a[:size])
	d.ReadInts("next states", n.next[:size])
	d.ReadInts("next actions", n.nextA[:size])
	d.ReadBools("terminal", n.term[:size])
	if dim == 0 {
		d.ReadInts("indices", n.k[:size])
	}
	d.ReadFloat64s("observations", n.x[:size*obs])
	d.ReadFloat64s("next observations", n.nx[:size*obs])
	d.ReadFloat64s("features", n.phi[:size*dim])
	d.ReadFloat64s("z", n.z[:size*dim])
	if err := d.Finish(); err != nil {
		return err
	}
	*r = *n
	return nil
}
