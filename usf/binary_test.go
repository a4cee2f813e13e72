package usf

import (
	"bytes"
	"encoding/binary"
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/internal/fileio"
	"github.com/successor-go/successor/sf"
)

// run is a small training loop with everything a checkpoint must hold: a
// neural USF, a replay, and the PCG state of the one rng that drives the
// environment, z draws and minibatch sampling.
type run struct {
	p   problem
	sp  *sampler
	pcg *rand.PCG
	rng *rand.Rand
	u   *Neural
	r   *Replay
	tr  *Batch // one fresh transition per step
	b   *Batch
}

func newRun(t testing.TB) *run {
	p := randomProblem(t, 12, 8, 3, 3, 0.25)
	pcg := rand.NewPCG(12, 34)
	rng := rand.New(pcg)
	u, err := NewNeural(8, 3, 3, p.gamma, &NeuralConfig{Hidden: []int{16, 16}, MaxBatch: 16, TargetEvery: 7, OnlineSelect: true}, rng)
	if err != nil {
		t.Fatal(err)
	}
	r, err := NewReplay(40, 8, 3) // small: the ring wraps during the test
	if err != nil {
		t.Fatal(err)
	}
	return &run{p: p, sp: newSampler(p, unitVectors(rng, 5, 3)), pcg: pcg, rng: rng, u: u, r: r,
		tr: NewBatch(1, 8, 3), b: NewBatch(16, 8, 3)}
}

// steps adds one sampled transition and makes one update, k times.
func (x *run) steps(t testing.TB, k int) {
	for range k {
		x.sp.fill(x.tr, x.rng)
		x.r.Add(&Entry{S: x.tr.S[0], A: x.tr.A[0], Next: x.tr.Next[0], NextA: -1, Terminal: x.tr.Terminal[0],
			X: x.tr.X, NextX: x.tr.NextX, Phi: x.tr.Phi, Z: x.tr.Z})
		x.r.Sample(x.b, x.rng)
		if _, err := x.u.Update(x.b); err != nil {
			t.Fatal(err)
		}
	}
}

func mustMarshal(t testing.TB, m interface{ MarshalBinary() ([]byte, error) }) []byte {
	t.Helper()
	b, err := m.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// TestResumeBitExact trains N steps, saves the network (online, target,
// Adam moments), the replay and the rng state, loads them into fresh
// values, trains N more, and compares every saved byte with 2N steps
// uninterrupted.
func TestResumeBitExact(t *testing.T) {
	const n = 60
	a := newRun(t)
	a.steps(t, 2*n)

	b := newRun(t)
	b.steps(t, n)
	nb, rb, pb := mustMarshal(t, b.u), mustMarshal(t, b.r), mustMarshal(t, b.pcg)

	c := newRun(t) // fresh values, then overwritten by the loaded state
	if err := c.u.UnmarshalBinary(nb); err != nil {
		t.Fatal(err)
	}
	if err := c.r.UnmarshalBinary(rb); err != nil {
		t.Fatal(err)
	}
	if err := c.pcg.UnmarshalBinary(pb); err != nil {
		t.Fatal(err)
	}
	c.steps(t, n)

	if !bytes.Equal(mustMarshal(t, a.u), mustMarshal(t, c.u)) {
		t.Error("network, target or optimiser state differs after resuming")
	}
	if !bytes.Equal(mustMarshal(t, a.r), mustMarshal(t, c.r)) {
		t.Error("replay differs after resuming")
	}
	if !bytes.Equal(mustMarshal(t, a.pcg), mustMarshal(t, c.pcg)) {
		t.Error("rng state differs after resuming")
	}
	if a.u.Updates() != 2*n || a.r.Added() != 2*n || a.r.Len() != 40 {
		t.Errorf("counts: %d updates, %d added, %d stored", a.u.Updates(), a.r.Added(), a.r.Len())
	}
	// The target network is part of the state: with TargetEvery 7 and 120
	// updates the last copy was at 119, so target and online differ now
	// only by one Adam step; both must match the uninterrupted run.
	x := make([]float64, 8)
	x[2] = 1
	z := []float64{0.6, 0, 0.8}
	p1, p2 := make([]float64, 9), make([]float64, 9)
	a.u.PsiTarget(p1, x, z)
	c.u.PsiTarget(p2, x, z)
	for i := range p1 {
		if p1[i] != p2[i] {
			t.Fatal("target networks differ")
		}
	}
}

// TestTabularRoundTrip saves and loads a trained tabular USF and checks
// bytes and continued training agree bit for bit.
func TestTabularRoundTrip(t *testing.T) {
	p := randomProblem(t, 13, 6, 2, 2, 0.2)
	rng := rand.New(rand.NewPCG(13, 13))
	zs := unitVectors(rng, 3, 2)
	tab, _ := NewTabular(6, 2, zs, p.gamma, &TabularConfig{Schedule: sf.StepSchedule{StepSize: 0.5, Power: 0.6}})
	sp := newSampler(p, zs)
	b := NewBatch(8, 0, 2)
	for range 30 {
		sp.fill(b, rng)
		tab.Update(b)
	}
	var tab2 Tabular
	if err := tab2.UnmarshalBinary(mustMarshal(t, tab)); err != nil {
		t.Fatal(err)
	}
	for range 30 {
		sp.fill(b, rng)
		tab.Update(b)
		tab2.Update(b)
	}
	if !bytes.Equal(mustMarshal(t, tab), mustMarshal(t, &tab2)) {
		t.Error("tabular differs after round trip")
	}
}

func TestLoadCorrupt(t *testing.T) {
	x := newRun(t)
	x.steps(t, 5)
	tab, _ := NewTabular(3, 2, [][]float64{{1, 0}}, 0.9, nil)
	type loader interface{ UnmarshalBinary([]byte) error }
	for _, tc := range []struct {
		name  string
		good  []byte
		fresh func() loader
	}{
		{"neural", mustMarshal(t, x.u), func() loader { return new(Neural) }},
		{"replay", mustMarshal(t, x.r), func() loader { return new(Replay) }},
		{"index replay", mustMarshal(t, indexReplay(t)), func() loader { return new(Replay) }},
		{"tabular", mustMarshal(t, tab), func() loader { return new(Tabular) }},
	} {
		if err := tc.fresh().UnmarshalBinary(tc.good); err != nil {
			t.Errorf("%s: good data: %v", tc.name, err)
		}
		if cap(tc.good) != len(tc.good) {
			t.Errorf("%s: buffer of capacity %d for %d bytes, want one allocation at full size", tc.name, cap(tc.good), len(tc.good))
		}
		for _, bad := range [][]byte{nil, tc.good[:8], tc.good[:len(tc.good)-1], flipByte(tc.good, 0), flipByte(tc.good, 13), flipByte(tc.good, len(tc.good)/2), flipByte(tc.good, len(tc.good)-2)} {
			if err := tc.fresh().UnmarshalBinary(bad); !errors.Is(err, ErrCorrupt) {
				t.Errorf("%s: corrupt data accepted or wrong error: %v", tc.name, err)
			}
		}
	}
	// Every truncation and every single-bit flip of the small records.
	for _, tc := range []struct {
		name  string
		good  []byte
		fresh func() loader
	}{
		{"tabular", mustMarshal(t, tab), func() loader { return new(Tabular) }},
		{"index replay", mustMarshal(t, indexReplay(t)), func() loader { return new(Replay) }},
	} {
		for n := range len(tc.good) {
			if err := tc.fresh().UnmarshalBinary(tc.good[:n]); !errors.Is(err, ErrCorrupt) {
				t.Fatalf("%s truncated to %d bytes: %v", tc.name, n, err)
			}
		}
		for i := range 8 * len(tc.good) {
			c := bytes.Clone(tc.good)
			c[i/8] ^= 1 << (i % 8)
			if err := tc.fresh().UnmarshalBinary(c); !errors.Is(err, ErrCorrupt) {
				t.Fatalf("%s with bit %d flipped: %v", tc.name, i, err)
			}
		}
	}
	// A loader leaves its receiver unchanged on error.
	before := mustMarshal(t, x.u)
	if err := x.u.UnmarshalBinary(flipByte(before, 40)); err == nil {
		t.Fatal("corrupt neural accepted")
	}
	if !bytes.Equal(before, mustMarshal(t, x.u)) {
		t.Error("failed load changed the receiver")
	}
}

// putInt returns a copy of the record b with the int64 at payload offset
// off set to v, resealed so that the field check, not the checksum, meets
// it.
func putInt(b []byte, off int, v uint64) []byte {
	c := bytes.Clone(b)
	binary.LittleEndian.PutUint64(c[fileio.HeaderLen+off:], v)
	return fileio.Reseal(c)
}

// TestLoadOutOfRange checks that contents out of range, under a valid
// checksum, are refused as corrupt: giant and overflowing sizes, and visit
// counts that no run can produce.
func TestLoadOutOfRange(t *testing.T) {
	tab, _ := NewTabular(3, 2, [][]float64{{1, 0}, {0, 1}}, 0.9, &TabularConfig{Schedule: sf.StepSchedule{Power: 0.5}})
	tb := mustMarshal(t, tab)
	visits := len(tb) - fileio.TrailerLen - 8*2*3*2 // payload offset of the visit counts, in the record
	rep := indexReplay(t)
	rb := mustMarshal(t, rep)
	putFloat := func(b []byte, at int, v float64) []byte {
		c := bytes.Clone(b)
		binary.LittleEndian.PutUint64(c[at:], math.Float64bits(v))
		return fileio.Reseal(c)
	}
	type loader interface{ UnmarshalBinary([]byte) error }
	for _, tc := range []struct {
		name string
		b    []byte
		into loader
	}{
		{"tabular states 2^31-1", putInt(tb, 0, 1<<31-1), new(Tabular)},
		{"tabular K 2^31-1", putInt(tb, 24, 1<<31-1), new(Tabular)},
		{"tabular sizes overflow", putInt(putInt(putInt(tb, 0, 1<<32), 8, 1<<32), 16, 1<<32), new(Tabular)},
		{"tabular negative steps", putInt(tb, 56, math.MaxUint64), new(Tabular)},
		{"tabular gamma 2", putFloat(tb, fileio.HeaderLen+32, 2), new(Tabular)},
		{"tabular negative visits", putFloat(tb, visits, -1), new(Tabular)},
		{"tabular NaN visits", putFloat(tb, visits, math.NaN()), new(Tabular)},
		{"tabular infinite visits", putFloat(tb, visits, math.Inf(1)), new(Tabular)},
		{"tabular fractional visits", putFloat(tb, visits, 0.5), new(Tabular)},
		// The tables start after 8 header words and K x d = 4 z values.
		{"tabular NaN value", putFloat(tb, fileio.HeaderLen+8*(8+4)+8, math.NaN()), new(Tabular)},
		{"tabular infinite value", putFloat(tb, fileio.HeaderLen+8*(8+4+23), math.Inf(-1)), new(Tabular)},
		{"tabular NaN z", putFloat(tb, fileio.HeaderLen+8*8, math.NaN()), new(Tabular)},
		{"replay capacity 2^31-1", putInt(rb, 0, 1<<31-1), new(Replay)},
		{"replay size beyond capacity", putInt(rb, 24, 6), new(Replay)},
		{"replay obs 2^31-1", putInt(rb, 8, 1<<31-1), new(Replay)},
	} {
		if err := tc.into.UnmarshalBinary(tc.b); !errors.Is(err, ErrCorrupt) {
			t.Errorf("%s: %v, want ErrCorrupt", tc.name, err)
		}
	}
	// The unaltered records load.
	for _, b := range [][]byte{tb, rb} {
		var err error
		switch string(b[:4]) {
		case tabularMagic:
			err = new(Tabular).UnmarshalBinary(b)
		default:
			err = new(Replay).UnmarshalBinary(b)
		}
		if err != nil {
			t.Errorf("%s: %v", b[:4], err)
		}
	}
}

func flipByte(b []byte, i int) []byte {
	c := bytes.Clone(b)
	c[i] ^= 0x10
	return c
}

// fuzzRoundTrip checks that a loader never panics, that every error wraps
// ErrCorrupt, and that accepted bytes marshal back to themselves.
func fuzzRoundTrip[T any, P interface {
	*T
	UnmarshalBinary([]byte) error
	MarshalBinary() ([]byte, error)
}](t *testing.T, data []byte) {
	roundTrip[T, P](t, data)
	// Re-seal the mutated bytes with a valid length and checksum so that
	// mutations reach the field checks, not only the CRC.
	roundTrip[T, P](t, fileio.Reseal(data))
}

func roundTrip[T any, P interface {
	*T
	UnmarshalBinary([]byte) error
	MarshalBinary() ([]byte, error)
}](t *testing.T, data []byte) {
	v := P(new(T))
	if err := v.UnmarshalBinary(data); err != nil {
		if !errors.Is(err, ErrCorrupt) {
			t.Fatalf("error %v does not wrap ErrCorrupt", err)
		}
		return
	}
	out, err := v.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(out, data) {
		t.Fatal("accepted bytes do not round-trip")
	}
}

func FuzzLoadNeural(f *testing.F) {
	x := newRun(f)
	x.steps(f, 3)
	b := mustMarshal(f, x.u)
	f.Add(b)
	f.Add([]byte(neuralMagic))
	f.Add(putInt(b, 0, 1<<31-1))               // obs
	f.Add(putInt(b, 8*3+8*2+8+8+1+8, 1<<31-1)) // length of the network
	f.Add(putInt(b, 8*3+8*2+8+8+1+8, math.MaxInt64))
	f.Fuzz(fuzzRoundTrip[Neural])
}

func FuzzLoadReplay(f *testing.F) {
	// A re-sealed header may ask for a capacity of up to 2^28 words, which
	// the loader allocates up front; keep each input cheap. The limit itself
	// is checked by TestReplayLoadLimit.
	defer func(w uint64) { replayLoadWords = w }(replayLoadWords)
	replayLoadWords = 1 << 16
	x := newRun(f)
	x.steps(f, 3)
	b := mustMarshal(f, x.r)
	f.Add(b)
	f.Add([]byte(replayMagic))
	f.Add(mustMarshal(f, indexReplay(f)))
	f.Add(putInt(b, 0, 1<<31-1))                  // capacity
	f.Add(putInt(b, 24, 1<<31-1))                 // size
	f.Add(putInt(putInt(b, 8, 1<<28), 16, 1<<28)) // obs and d
	f.Fuzz(fuzzRoundTrip[Replay])
}

func FuzzLoadTabular(f *testing.F) {
	tab, _ := NewTabular(3, 2, [][]float64{{1, 0}, {0, 1}}, 0.9, &TabularConfig{Schedule: sf.StepSchedule{Power: 0.5}})
	tab.Tables[1].Data[2] = -2
	b := mustMarshal(f, tab)
	f.Add(b)
	f.Add(putInt(b, 0, 1<<31-1))  // states
	f.Add(putInt(b, 24, 1<<31-1)) // K
	f.Add(putInt(putInt(putInt(b, 0, 1<<32), 8, 1<<32), 16, 1<<32))
	f.Add(putInt(putInt(b, 0, math.MaxInt64), 8, math.MaxInt64))
	f.Fuzz(fuzzRoundTrip[Tabular])
}

// indexReplay returns a replay of dimension 0 (set indices kept instead of
// phi and z) with observations, wrapped once.
func indexReplay(t testing.TB) *Replay {
	r, err := NewReplay(5, 2, 0)
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i < 7; i++ {
		r.Add(&Entry{S: i, A: i % 2, Next: i + 1, NextA: -1, Terminal: i == 3, K: i % 3,
			X: []float64{float64(i), 1}, NextX: []float64{float64(i + 1), 1}})
	}
	return r
}

// TestReplayLoadLimit checks that a header whose buffers would exceed the
// load limit is rejected as corrupt before anything is allocated, and that
// a replay within the limit still loads.
func TestReplayLoadLimit(t *testing.T) {
	defer func(w uint64) { replayLoadWords = w }(replayLoadWords)
	r, err := NewReplay(100, 2, 3) // 100 x (6 + 4 + 6) = 1600 words
	if err != nil {
		t.Fatal(err)
	}
	b := mustMarshal(t, r)
	replayLoadWords = 1600
	var got Replay
	if err := got.UnmarshalBinary(b); err != nil {
		t.Fatalf("within the limit: %v", err)
	}
	replayLoadWords = 1599
	if err := got.UnmarshalBinary(b); !errors.Is(err, ErrCorrupt) {
		t.Fatalf("over the limit: got %v, want ErrCorrupt", err)
	}
}
