package transfer

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"hash/crc32"
	"io"
	"math"
	"math/rand/v2"
	"os"
)

// Checkpoint file format (our own, little-endian):
//
//	magic    8 bytes  "SFXFER\x00\x01"
//	version  uint32   checkpointVersion
//	length   uint64   payload length in bytes
//	payload  length bytes (see encode)
//	crc      uint32   CRC-32 (Castagnoli) of everything before it
//
// The payload holds the configuration, the discriminator's parameters, the
// universal SFs, the replay buffer, the PCG state (its MarshalBinary form)
// and the counters, so a loaded agent continues bit-identically.
const checkpointVersion = 1

var checkpointMagic = [8]byte{'S', 'F', 'X', 'F', 'E', 'R', 0, 1}

var crcTable = crc32.MakeTable(crc32.Castagnoli)

// Save writes the agent, with its whole training state, to path atomically:
// a temporary file in the same folder is written, synced and renamed over
// path, so a crash leaves either the old file or the new one.
func (ag *Agent) Save(path string) error {
	if err := writeAtomic(path, ag.marshal()); err != nil {
		return fmt.Errorf("transfer: save: %w", err)
	}
	return nil
}

// Load reads an agent saved by Save. It returns an error wrapping
// ErrCheckpoint if the file is truncated, corrupted (checksum), of another
// version, or inconsistent.
func Load(path string) (*Agent, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("transfer: load: %w", err)
	}
	ag, err := Unmarshal(data)
	if err != nil {
		return nil, fmt.Errorf("transfer: load %s: %w", path, err)
	}
	return ag, nil
}

// WriteTo writes the checkpoint encoding of the agent to w.
func (ag *Agent) WriteTo(w io.Writer) (int64, error) {
	n, err := w.Write(ag.marshal())
	return int64(n), err
}

func (ag *Agent) marshal() []byte {
	var e enc
	c := &ag.cfg
	e.i(int64(c.Method))
	e.i(int64(c.Dim))
	e.f(c.Kappa)
	e.i(int64(c.Steps))
	e.i(int64(c.EpisodeSteps))
	e.f(c.Gamma)
	e.f(c.Epsilon)
	e.i(int64(c.Batch))
	e.i(int64(c.Replay))
	e.f(c.LearnRate)
	e.f(c.DiscRate)
	e.u(c.Seed)
	e.i(int64(c.CheckpointEvery))
	e.i(int64(c.ProgressEvery))
	e.i(int64(ag.n))
	e.i(int64(ag.a))
	e.i(int64(ag.d))
	e.i(int64(ag.k))
	e.i(int64(c.Relabel))
	e.fs(ag.param)
	e.fs(ag.skills)
	e.fs(ag.usf)
	e.fs(ag.q)
	st, err := ag.pcg.MarshalBinary()
	if err != nil {
		panic("transfer: pcg marshal: " + err.Error()) // cannot fail for *rand.PCG
	}
	e.bs(st)
	rb := &ag.replay
	e.i(int64(rb.cap))
	e.i(int64(rb.pos))
	e.i(int64(rb.count))
	for i := range rb.count {
		e.i(int64(rb.s[i]))
		e.i(int64(rb.a[i]))
		e.i(int64(rb.next[i]))
		t := int64(0)
		if rb.term[i] {
			t = 1
		}
		e.i(t)
		e.i(int64(rb.k[i]))
	}
	e.i(int64(ag.steps))
	e.i(int64(ag.episodes))
	e.i(int64(ag.nextProgress))
	e.i(int64(ag.nextCheckpoint))
	e.i(int64(ag.acc.n))
	e.i(int64(ag.acc.nTD))
	e.f(ag.acc.loss)
	e.f(ag.acc.mi)
	e.f(ag.acc.mi2)
	e.f(ag.acc.td)

	var out bytes.Buffer
	out.Write(checkpointMagic[:])
	binary.Write(&out, binary.LittleEndian, uint32(checkpointVersion))
	binary.Write(&out, binary.LittleEndian, uint64(len(e.b)))
	out.Write(e.b)
	binary.Write(&out, binary.LittleEndian, crc32.Checksum(out.Bytes(), crcTable))
	return out.Bytes()
}

// Unmarshal decodes a checkpoint produced by Save or WriteTo. Errors wrap
// ErrCheckpoint.
func Unmarshal(data []byte) (*Agent, error) {
	const head = 8 + 4 + 8
	if len(data) < head+4 {
		return nil, fmt.Errorf("transfer: checkpoint truncated (%d bytes): %w", len(data), ErrCheckpoint)
	}
	if !bytes.Equal(data[:8], checkpointMagic[:]) {
		return nil, fmt.Errorf("transfer: not a checkpoint (bad magic): %w", ErrCheckpoint)
	}
	if v := binary.LittleEndian.Uint32(data[8:12]); v != checkpointVersion {
		return nil, fmt.Errorf("transfer: checkpoint version %d, want %d: %w", v, checkpointVersion, ErrCheckpoint)
	}
	n := binary.LittleEndian.Uint64(data[12:20])
	if n != uint64(len(data)-head-4) {
		return nil, fmt.Errorf("transfer: checkpoint length %d does not match file (%d bytes): %w", n, len(data), ErrCheckpoint)
	}
	body := data[:len(data)-4]
	if got, want := crc32.Checksum(body, crcTable), binary.LittleEndian.Uint32(data[len(data)-4:]); got != want {
		return nil, fmt.Errorf("transfer: checkpoint checksum %08x, want %08x: %w", got, want, ErrCheckpoint)
	}
	d := dec{b: body[head:]}
	var c PretrainConfig
	c.Method = Method(d.i())
	c.Dim = int(d.i())
	c.Kappa = d.f()
	c.Steps = int(d.i())
	c.EpisodeSteps = int(d.i())
	c.Gamma = d.f()
	c.Epsilon = d.f()
	c.Batch = int(d.i())
	c.Replay = int(d.i())
	c.LearnRate = d.f()
	c.DiscRate = d.f()
	c.Seed = d.u()
	c.CheckpointEvery = int(d.i())
	c.ProgressEvery = int(d.i())
	ns, na, nd := int(d.i()), int(d.i()), int(d.i())
	nk := int(d.i())
	c.Relabel = int(d.i())
	c.Skills = nk
	if d.err != nil {
		return nil, d.err
	}
	bad := func(what string) error {
		return fmt.Errorf("transfer: checkpoint: %s: %w", what, ErrCheckpoint)
	}
	if c.Method == Given {
		// Given features live in the parameter table; a placeholder map
		// satisfies the configuration check.
		c.Features = dimOnly(nd)
	}
	if err := c.validate(); err != nil || c.Steps < 0 || c.EpisodeSteps < 1 || c.Batch < 1 || c.Replay < 1 {
		return nil, bad("invalid configuration")
	}
	if ns <= 0 || na <= 0 || nd != c.Dim || ns > len(data) || na > len(data) {
		return nil, bad("invalid sizes")
	}
	if c.Method == Categorical {
		c.Skills = 32 // not used by Categorical; any valid value
	}
	if nk < 1 || nk > len(data) || c.Method == Categorical && nk != nd {
		return nil, bad("skill count")
	}
	param := d.fs()
	skills := d.fs()
	usf := d.fs()
	q := d.fs()
	st := d.bs()
	if d.err != nil {
		return nil, d.err
	}
	if len(param) != ns*nd || len(skills) != nk*nd || len(usf) != nk*ns*na*nd || len(q) != nk*ns*na {
		return nil, bad("table sizes")
	}
	ag := &Agent{cfg: c, n: ns, a: na, d: nd, k: nk, param: param, skills: skills, usf: usf, q: q}
	ag.phi = make([]float64, ns*nd)
	ag.pcg = new(rand.PCG)
	if err := ag.pcg.UnmarshalBinary(st); err != nil {
		return nil, bad("random state")
	}
	ag.rng = rand.New(ag.pcg)
	rcap, pos, count := int(d.i()), int(d.i()), int(d.i())
	if d.err != nil {
		return nil, d.err
	}
	if rcap != c.Replay || count < 0 || count > rcap || pos < 0 || pos >= rcap || count < rcap && pos != count || count*5*8 > d.left() {
		return nil, bad("replay sizes")
	}
	ag.replay = newReplay(rcap)
	rb := &ag.replay
	rb.pos, rb.count = pos, count
	for i := range count {
		s, a, nx, t, k := d.i(), d.i(), d.i(), d.i(), d.i()
		if s < 0 || s >= int64(ns) || a < 0 || a >= int64(na) || nx < 0 || nx >= int64(ns) || t < 0 || t > 1 || k < 0 || k >= int64(nk) {
			return nil, bad("replay entry")
		}
		rb.s[i], rb.a[i], rb.next[i], rb.term[i], rb.k[i] = int32(s), int32(a), int32(nx), t == 1, int32(k)
	}
	ag.steps = int(d.i())
	ag.episodes = int(d.i())
	ag.nextProgress = int(d.i())
	ag.nextCheckpoint = int(d.i())
	ag.acc.n = int(d.i())
	ag.acc.nTD = int(d.i())
	ag.acc.loss = d.f()
	ag.acc.mi = d.f()
	ag.acc.mi2 = d.f()
	ag.acc.td = d.f()
	if d.err != nil {
		return nil, d.err
	}
	if d.left() != 0 {
		return nil, bad("trailing bytes")
	}
	if ag.steps < 0 || ag.episodes < 0 {
		return nil, bad("counters")
	}
	for _, v := range param {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, bad("non-finite parameter")
		}
	}
	for _, v := range usf {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, bad("non-finite successor feature")
		}
	}
	for _, v := range q {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, bad("non-finite value")
		}
	}
	if c.Method == Given {
		ag.cfg.Features = nil
	}
	for _, v := range skills {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, bad("non-finite skill")
		}
	}
	ag.setConstants()
	if c.Method == VMF {
		for s := range ns {
			p := param[s*nd : (s+1)*nd]
			if dot(p, p) == 0 {
				return nil, bad("zero discriminator row")
			}
		}
	}
	for s := range ns {
		ag.refreshPhi(s)
	}
	ag.alloc()
	return ag, nil
}

// dimOnly is a FeatureMap placeholder of a given dimension.
type dimOnly int

func (d dimOnly) Dim() int                               { return int(d) }
func (d dimOnly) Features(dst []float64, s, a, next int) { clear(dst) }

type enc struct{ b []byte }

func (e *enc) u(v uint64)  { e.b = binary.LittleEndian.AppendUint64(e.b, v) }
func (e *enc) i(v int64)   { e.u(uint64(v)) }
func (e *enc) f(v float64) { e.u(math.Float64bits(v)) }
func (e *enc) fs(v []float64) {
	e.i(int64(len(v)))
	for _, x := range v {
		e.f(x)
	}
}
func (e *enc) bs(v []byte) {
	e.i(int64(len(v)))
	e.b = append(e.b, v...)
}

type dec struct {
	b   []byte
	err error
}

func (d *dec) left() int { return len(d.b) }

func (d *dec) u() uint64 {
	if d.err != nil {
		return 0
	}
	if len(d.b) < 8 {
		d.err = fmt.Errorf("transfer: checkpoint payload truncated: %w", ErrCheckpoint)
		return 0
	}
	v := binary.LittleEndian.Uint64(d.b)
	d.b = d.b[8:]
	return v
}
func (d *dec) i() int64   { return int64(d.u()) }
func (d *dec) f() float64 { return math.Float64frombits(d.u()) }
func (d *dec) fs() []float64 {
	n := d.i()
	if d.err != nil {
		return nil
	}
	if n < 0 || n > int64(len(d.b)/8) {
		d.err = fmt.Errorf("transfer: checkpoint: slice length %d: %w", n, ErrCheckpoint)
		return nil
	}
	v := make([]float64, n)
	for k := range v {
		v[k] = d.f()
	}
	return v
}
func (d *dec) bs() []byte {
	n := d.i()
	if d.err != nil {
		return nil
	}
	if n < 0 || n > int64(len(d.b)) {
		d.err = fmt.Errorf("transfer: checkpoint: byte length %d: %w", n, ErrCheckpoint)
		return nil
	}
	v := append([]byte(nil), d.b[:n]...)
	d.b = d.b[n:]
	return v
}
