package transfer

import (
	"bytes"
	"encoding"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"hash/crc32"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"slices"

	"github.com/successor-go/successor/internal/fileio"
	"github.com/successor-go/successor/sf"
	"github.com/successor-go/successor/skills"
	"github.com/successor-go/successor/usf"
)

// Checkpoint file format (our own, little-endian):
//
//	magic    8 bytes  "SFXFER\x00\x01"
//	version  uint32   checkpointVersion
//	length   uint64   payload length in bytes
//	payload  length bytes (see marshal)
//	crc      uint32   CRC-32 (Castagnoli) of everything before it
//
// The payload holds, as little-endian 8-byte integers and floats and
// length-prefixed byte strings: the resolved configuration as JSON (the
// form of PretrainConfig's json tags, as encoding/json writes it, keys in
// field order) and CheckpointEvery; the sizes (states, actions, skills);
// the discriminator in skills.Marshal form (VMF, Categorical) or the fixed
// feature rows (Random, Given); the skill vectors; usf.Tabular and
// usf.Replay in their MarshalBinary forms (each with its own checksum);
// the PCG state (its MarshalBinary form); the counts of the empirical
// model in increasing key order; and the counters, so a loaded agent
// continues bit-identically. Version 2 (0.1.0) listed the configuration
// field by field and is not read.
const checkpointVersion = 3

var checkpointMagic = [8]byte{'S', 'F', 'X', 'F', 'E', 'R', 0, 1}

var crcTable = crc32.MakeTable(crc32.Castagnoli)

// Save writes the agent, with its whole training state, to path atomically:
// a temporary file in the same folder is written, synced and renamed over
// path, so a crash leaves either the old file or the new one.
func (ag *Agent) Save(path string) error {
	if err := fileio.WriteAtomic(path, ag.marshal(), 0o600); err != nil {
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
	// The large parts are encoded first so that the buffer is allocated
	// once at its final size, and the header is written in place in front
	// of the payload: a checkpoint of B bytes needs about 2B of memory.
	var discBytes []byte
	if ag.disc != nil {
		b, err := skills.Marshal(ag.disc)
		if err != nil {
			panic("transfer: discriminator marshal: " + err.Error()) // cannot fail for VMF and Softmax
		}
		discBytes = b
	}
	tabBytes := mustMarshal(ag.usf)
	bufBytes := mustMarshal(ag.buf)
	const head = 8 + 4 + 8
	size := head + len(discBytes) + len(tabBytes) + len(bufBytes) + 8*(ag.n*ag.d+ag.k*len(ag.zs[0])+2*len(ag.counts)) + 1024
	cfgJSON, err := configJSON(&ag.cfg)
	if err != nil {
		panic("transfer: configuration json: " + err.Error()) // a resolved configuration is finite
	}
	size += len(cfgJSON)
	e := enc{b: make([]byte, head, size)}
	e.bs(cfgJSON)
	e.i(int64(ag.cfg.CheckpointEvery))
	e.i(int64(ag.n))
	e.i(int64(ag.a))
	e.i(int64(ag.k))
	// The discriminator (skills.Marshal) or the fixed feature rows.
	if ag.disc != nil {
		e.bs(discBytes)
		e.fs(nil)
	} else {
		e.bs(nil)
		rows := make([]float64, 0, ag.n*ag.d)
		for s := range ag.n {
			rows = append(rows, ag.fixed.Row(s)...)
		}
		e.fs(rows)
	}
	zs := make([]float64, 0, ag.k*len(ag.zs[0]))
	for _, z := range ag.zs {
		zs = append(zs, z...)
	}
	e.i(int64(len(ag.zs[0])))
	e.fs(zs)
	e.bs(tabBytes)
	e.bs(bufBytes)
	e.bs(mustMarshal(ag.pcg))
	keys := sortedKeys(ag.counts)
	e.i(int64(len(keys)))
	for _, k := range keys {
		e.u(k)
		e.i(ag.counts[k])
	}
	e.i(int64(ag.steps))
	e.i(int64(ag.episodes))
	e.i(int64(ag.nextProgress))
	e.i(int64(ag.nextCheckpoint))
	e.i(int64(ag.acc.n))
	e.i(int64(ag.td.N))
	e.f(ag.acc.loss)
	e.f(ag.acc.mi)
	e.f(ag.acc.mi2)
	e.f(ag.td.SumSq)

	out := e.b
	copy(out, checkpointMagic[:])
	binary.LittleEndian.PutUint32(out[8:], checkpointVersion)
	binary.LittleEndian.PutUint64(out[12:], uint64(len(out)-head))
	return binary.LittleEndian.AppendUint32(out, crc32.Checksum(out, crcTable))
}

// configJSON returns the JSON form of a configuration (it fails only for
// a non-finite value).
func configJSON(c *PretrainConfig) ([]byte, error) { return json.Marshal(c) }

func mustMarshal(m encoding.BinaryMarshaler) []byte {
	b, err := m.MarshalBinary()
	if err != nil {
		panic("transfer: marshal: " + err.Error()) // cannot fail for the library types
	}
	return b
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
	bad := func(what string) error {
		return fmt.Errorf("transfer: checkpoint: %s: %w", what, ErrCheckpoint)
	}
	cfgJSON := d.bs()
	every := d.i()
	ns, na, nk := int(d.i()), int(d.i()), int(d.i())
	if d.err != nil {
		return nil, d.err
	}
	var c PretrainConfig
	jd := json.NewDecoder(bytes.NewReader(cfgJSON))
	jd.DisallowUnknownFields()
	if err := jd.Decode(&c); err != nil || jd.More() {
		return nil, bad("configuration")
	}
	// The stored form must be the canonical one, so that a loaded agent
	// saves to the same bytes.
	c.CheckpointEvery = int(every)
	canon, err := configJSON(&c)
	if every < 0 || int64(c.CheckpointEvery) != every || err != nil || !bytes.Equal(canon, cfgJSON) {
		return nil, bad("configuration")
	}
	if err := c.validate(); err != nil {
		return nil, bad("invalid configuration")
	}
	if ns <= 0 || na <= 0 || ns > len(data) || na > len(data) || nk != c.Skills || nk > len(data) || c.Dim > len(data) {
		return nil, bad("invalid sizes")
	}
	ag := &Agent{cfg: c, n: ns, a: na, k: nk}
	discBytes := d.bs()
	rows := d.fs()
	zdim := int(d.i())
	zs := d.fs()
	tabBytes := d.bs()
	bufBytes := d.bs()
	pcgBytes := d.bs()
	if d.err != nil {
		return nil, d.err
	}
	switch c.Method {
	case VMF, Categorical:
		disc, err := skills.Unmarshal(discBytes)
		if err != nil {
			return nil, fmt.Errorf("transfer: checkpoint: discriminator: %w: %w", ErrCheckpoint, err)
		}
		_, isVMF := disc.(*skills.VMF)
		zd := c.Dim
		if c.Method == Categorical {
			zd = c.Skills
		}
		var opt skills.OptimConfig
		switch d := disc.(type) {
		case *skills.VMF:
			opt = d.Optim()
		case *skills.Softmax:
			opt = d.Optim()
		}
		if isVMF != (c.Method == VMF) || disc.InDim() != ns || disc.ZDim() != zd || disc.FeatureDim() != c.Dim ||
			opt.Method != c.DiscOptim || len(rows) != 0 {
			return nil, bad("discriminator does not match the configuration")
		}
		ag.disc = disc
	default:
		if len(discBytes) != 0 || len(rows) != ns*c.Dim {
			return nil, bad("feature table sizes")
		}
		rr := make([][]float64, ns)
		for s := range rr {
			rr[s] = rows[s*c.Dim : (s+1)*c.Dim]
		}
		f, err := sf.NewNextState(rr)
		if err != nil {
			return nil, fmt.Errorf("transfer: checkpoint: features: %w: %w", ErrCheckpoint, err)
		}
		ag.fixed = f
	}
	wantZ := c.Dim
	if c.Method == Categorical {
		wantZ = c.Skills
	}
	if zdim != wantZ || len(zs) != nk*zdim {
		return nil, bad("skill sizes")
	}
	for k := range nk {
		z := zs[k*zdim : (k+1)*zdim : (k+1)*zdim]
		for _, v := range z {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, bad("non-finite skill")
			}
		}
		ag.zs = append(ag.zs, z)
	}
	if c.Method == Categorical {
		ag.prior = skills.Categorical{K: c.Skills}
	} else {
		ag.prior = skills.UniformSphere{D: c.Dim}
	}
	tab := new(usf.Tabular)
	if err := tab.UnmarshalBinary(tabBytes); err != nil {
		return nil, fmt.Errorf("transfer: checkpoint: successor features: %w: %w", ErrCheckpoint, err)
	}
	buf := new(usf.Replay)
	if err := buf.UnmarshalBinary(bufBytes); err != nil {
		return nil, fmt.Errorf("transfer: checkpoint: replay: %w: %w", ErrCheckpoint, err)
	}
	ag.pcg = new(rand.PCG)
	if err := ag.pcg.UnmarshalBinary(pcgBytes); err != nil {
		return nil, bad("random state")
	}
	ag.rng = rand.New(ag.pcg)
	fd := c.Dim
	if ta, td := tab.Shape(); tab.ObsDim() != ns || ta != na || td != fd || len(tab.Z) != nk {
		return nil, bad("successor feature sizes")
	}
	w := make([]float64, fd)
	for k, z := range ag.zs {
		ag.taskVector(w, z)
		if !slices.Equal(w, tab.Z[k]) {
			return nil, bad("successor features of another skill set")
		}
	}
	if bo, bd := buf.ObsDim(), buf.Dim(); bo != 0 || bd != fd || buf.Cap() != c.Replay {
		return nil, bad("replay sizes")
	}
	nc := d.i()
	if d.err != nil {
		return nil, d.err
	}
	if nc < 0 || nc > int64(d.left()/16) {
		return nil, bad("model size")
	}
	ag.counts = make(map[uint64]int64, nc)
	var prev uint64
	for i := range nc {
		key, cnt := d.u(), d.i()
		if d.err != nil {
			return nil, d.err
		}
		if i > 0 && key <= prev || key>>1 >= uint64(ns*na*ns) || cnt < 1 {
			return nil, bad("model entry")
		}
		prev = key
		ag.counts[key] = cnt
	}
	ag.steps = int(d.i())
	ag.episodes = int(d.i())
	ag.nextProgress = int(d.i())
	ag.nextCheckpoint = int(d.i())
	ag.acc.n = int(d.i())
	ag.td.N = int(d.i())
	ag.acc.loss = d.f()
	ag.acc.mi = d.f()
	ag.acc.mi2 = d.f()
	ag.td.SumSq = d.f()
	if d.err != nil {
		return nil, d.err
	}
	if d.left() != 0 {
		return nil, bad("trailing bytes")
	}
	if ag.steps < 0 || ag.episodes < 0 || buf.Len() > ag.steps {
		return nil, bad("counters")
	}
	if buf.Len() == 0 && ag.steps > 0 {
		return nil, bad("empty replay")
	}
	if err := ag.init(ns, na, c.Replay, tab, buf); err != nil {
		return nil, fmt.Errorf("transfer: checkpoint: %w: %w", ErrCheckpoint, err)
	}
	return ag, nil
}

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
