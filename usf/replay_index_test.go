package usf

import (
	"bytes"
	"errors"
	"math"
	"math/rand/v2"
	"testing"
)

// TestReplayEntry checks that Entry reads the stored
// transitions oldest first, before and after the ring wraps, copies into
// the slices given and leaves nil ones alone.
func TestReplayEntry(t *testing.T) {
	for _, tc := range []struct {
		name  string
		added int
		first int // S of the oldest stored transition
	}{
		{"partial", 3, 0},
		{"full", 4, 0},
		{"wrapped", 10, 6},
		{"wrapped-once", 5, 1},
	} {
		t.Run(tc.name, func(t *testing.T) {
			r, _ := NewReplay(4, 2, 1)
			x, nx, phi, z := []float64{0, 0}, []float64{0, 0}, []float64{0}, []float64{0}
			for i := 0; i < tc.added; i++ {
				x[1], nx[1], phi[0], z[0] = float64(i), float64(i+1), float64(-i), float64(2*i)
				r.Add(&Entry{S: i, A: i % 3, Next: i + 1, NextA: i%2 - 1, Terminal: i%2 == 0, X: x, NextX: nx, Phi: phi, Z: z})
			}
			if want := min(tc.added, 4); r.Len() != want {
				t.Fatalf("Len %d, want %d", r.Len(), want)
			}
			dst := Entry{X: make([]float64, 2), NextX: make([]float64, 2), Phi: make([]float64, 1), Z: make([]float64, 1)}
			for i := 0; i < r.Len(); i++ {
				r.Entry(&dst, i)
				s := tc.first + i
				if dst.S != s || dst.A != s%3 || dst.Next != s+1 || dst.NextA != s%2-1 || dst.Terminal != (s%2 == 0) ||
					dst.X[1] != float64(s) || dst.NextX[1] != float64(s+1) || dst.Phi[0] != float64(-s) || dst.Z[0] != float64(2*s) {
					t.Fatalf("transition %d = %+v, want the one added with S = %d", i, dst, s)
				}
			}
			var bare Entry
			r.Entry(&bare, r.Len()-1)
			if bare.X != nil || bare.Phi != nil || bare.S != tc.first+r.Len()-1 {
				t.Errorf("nil slices: got %+v", bare)
			}
			if !panics(func() { r.Entry(&dst, r.Len()) }) || !panics(func() { r.Entry(&dst, -1) }) {
				t.Error("index out of range accepted")
			}
			if !panics(func() { r.Entry(&Entry{Phi: make([]float64, 2)}, 0) }) {
				t.Error("wrong feature length accepted")
			}
			if n := testing.AllocsPerRun(10, func() { r.Entry(&dst, 0) }); n != 0 {
				t.Errorf("%v allocs, want 0", n)
			}
		})
	}
}

// TestReplayValidate checks each bound of Validate on a replay with one
// bad transition, and that a zero bound skips its check.
func TestReplayValidate(t *testing.T) {
	good := func(i int) Entry {
		return Entry{S: i % 5, A: i % 3, Next: (i + 1) % 5, NextA: -1, Phi: []float64{1, 0}, Z: []float64{0, 1}}
	}
	for _, tc := range []struct {
		name                  string
		dim                   int
		bad                   func(*Entry)
		states, actions, sets int
		err                   error
	}{
		{"good", 2, func(*Entry) {}, 5, 3, 0, nil},
		{"next action given", 2, func(tr *Entry) { tr.NextA = 2 }, 5, 3, 0, nil},
		{"state", 2, func(tr *Entry) { tr.S = 5 }, 5, 3, 0, ErrDimension},
		{"negative next state", 2, func(tr *Entry) { tr.Next = -1 }, 5, 3, 0, ErrDimension},
		{"states unchecked", 2, func(tr *Entry) { tr.Next = -1 }, 0, 3, 0, nil},
		{"action", 2, func(tr *Entry) { tr.A = 3 }, 5, 3, 0, ErrDimension},
		{"next action", 2, func(tr *Entry) { tr.NextA = 3 }, 5, 3, 0, ErrDimension},
		{"actions unchecked", 2, func(tr *Entry) { tr.A = 3 }, 5, 0, 0, nil},
		{"feature", 2, func(tr *Entry) { tr.Phi = []float64{math.NaN(), 0} }, 5, 3, 0, ErrNonFinite},
		{"z", 2, func(tr *Entry) { tr.Z = []float64{math.Inf(-1), 0} }, 0, 0, 0, ErrNonFinite},
		{"index", 0, func(tr *Entry) { tr.K = 4 }, 5, 3, 4, ErrDimension},
		{"negative index", 0, func(tr *Entry) { tr.K = -1 }, 5, 3, 4, ErrDimension},
		{"index in range", 0, func(tr *Entry) { tr.K = 3 }, 5, 3, 4, nil},
		{"indices unchecked", 0, func(tr *Entry) { tr.K = 9 }, 5, 3, 0, nil},
	} {
		r, _ := NewReplay(6, 0, tc.dim)
		for i := 0; i < 9; i++ { // wraps: the bad one (i = 7) is stored transition 4
			tr := good(i)
			if tc.dim == 0 {
				tr.Phi, tr.Z = nil, nil
			}
			if i == 7 {
				tc.bad(&tr)
			}
			r.Add(&tr)
		}
		err := r.Validate(tc.states, tc.actions, tc.sets)
		if tc.err == nil && err != nil || !errors.Is(err, tc.err) {
			t.Errorf("%s: err %v, want %v", tc.name, err, tc.err)
		}
		// The same after a round trip through the binary form.
		var loaded Replay
		if err := loaded.UnmarshalBinary(mustMarshal(t, r)); err != nil {
			t.Fatal(err)
		}
		if err2 := loaded.Validate(tc.states, tc.actions, tc.sets); (err == nil) != (err2 == nil) {
			t.Errorf("%s: loaded replay validates differently: %v vs %v", tc.name, err2, err)
		}
	}
}

// TestReplayIndices feeds the same transitions to a replay that keeps phi
// and z (d = 3) and to one that keeps the set index (d = 0), samples both
// with the same seed, fills phi and z of the second from s' and the set,
// and checks that the batches and the Tabular updates on them agree bit
// for bit; the index replay round-trips and resumes exactly.
func TestReplayIndices(t *testing.T) {
	p := randomProblem(t, 31, 6, 2, 3, 0.2)
	rng := rand.New(rand.NewPCG(31, 31))
	zs := unitVectors(rng, 4, 3)
	feat := func(dst []float64, next int) { // invented features of s'
		for j := range dst {
			dst[j] = math.Sin(float64(3*next + j))
		}
	}
	full, _ := NewReplay(50, 0, 3)
	idx, _ := NewReplay(50, 0, 0)
	tr := Entry{Phi: make([]float64, 3), Z: make([]float64, 3)}
	add := func(n int) {
		for range n {
			tr.S, tr.A, tr.Next, tr.NextA = rng.IntN(6), rng.IntN(2), rng.IntN(6), -1
			tr.Terminal = rng.IntN(5) == 0
			tr.K = rng.IntN(len(zs))
			feat(tr.Phi, tr.Next)
			copy(tr.Z, zs[tr.K])
			full.Add(&tr)
			ti := tr
			ti.Phi, ti.Z = nil, nil
			idx.Add(&ti)
		}
	}
	add(70) // wraps
	a, _ := NewTabular(6, 2, zs, p.gamma, nil)
	c, _ := NewTabular(6, 2, zs, p.gamma, nil)
	bf := NewBatch(16, 0, 3)
	bi := NewBatch(16, 0, 3)
	bi.K = make([]int, 16)
	step := func(seed uint64) {
		full.Sample(bf, rand.New(rand.NewPCG(seed, 1)))
		idx.Sample(bi, rand.New(rand.NewPCG(seed, 1)))
		for i, k := range bi.K {
			feat(bi.Phi[3*i:3*i+3], bi.Next[i])
			copy(bi.Z[3*i:3*i+3], zs[k])
		}
		if !equalVec(bf.Phi, bi.Phi) || !equalVec(bf.Z, bi.Z) {
			t.Fatal("sampled features or z differ")
		}
		for i := range bf.S {
			if bf.S[i] != bi.S[i] || bf.A[i] != bi.A[i] || bf.Next[i] != bi.Next[i] || bf.Terminal[i] != bi.Terminal[i] || bf.NextA[i] != bi.NextA[i] {
				t.Fatal("sampled transitions differ")
			}
		}
		la, _ := a.Update(bf)
		lc, _ := c.Update(bi)
		if la != lc {
			t.Fatalf("loss %v vs %v", la, lc)
		}
	}
	for seed := range uint64(20) {
		step(seed)
	}
	if !bytes.Equal(mustMarshal(t, a), mustMarshal(t, c)) {
		t.Error("updates from the two replays differ")
	}
	var loaded Replay
	saved := mustMarshal(t, idx)
	if err := loaded.UnmarshalBinary(saved); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(mustMarshal(t, &loaded), saved) {
		t.Error("index replay does not round-trip")
	}
	if o, d := loaded.ObsDim(), loaded.Dim(); o != 0 || d != 0 || loaded.Len() != 50 || loaded.Added() != 70 {
		t.Errorf("loaded shape %d %d, len %d, added %d", o, d, loaded.Len(), loaded.Added())
	}
	for i := 0; i < idx.Len(); i++ {
		var u, v, w Entry
		idx.Entry(&u, i)
		loaded.Entry(&v, i)
		full.Entry(&w, i)
		if u.S != v.S || u.A != v.A || u.Next != v.Next || u.NextA != v.NextA || u.Terminal != v.Terminal || u.K != v.K ||
			u.S != w.S || u.Next != w.Next || u.A != w.A {
			t.Fatalf("transition %d: %+v, loaded %+v, full replay %+v", i, u, v, w)
		}
	}
	// Continue both: same bits.
	idx2 := &loaded
	ti := Entry{S: 1, A: 1, Next: 2, NextA: -1, K: 3}
	idx.Add(&ti)
	idx2.Add(&ti)
	if !bytes.Equal(mustMarshal(t, idx), mustMarshal(t, idx2)) {
		t.Error("index replay differs after resuming")
	}

	// Misuse panics.
	if !panics(func() { idx.Add(&Entry{Phi: []float64{1, 2, 3}}) }) {
		t.Error("features given to an index replay")
	}
	if !panics(func() { idx.Sample(NewBatch(4, 0, 3), rng) }) {
		t.Error("index replay sampled into a batch without K")
	}
	bad := NewBatch(4, 0, 3)
	bad.K = make([]int, 4)
	if !panics(func() { full.Sample(bad, rng) }) {
		t.Error("full replay sampled into a batch with K")
	}
	if n := testing.AllocsPerRun(10, func() {
		idx.Add(&ti)
		idx.Sample(bi, rng)
	}); n != 0 {
		t.Errorf("%v allocs, want 0", n)
	}
}
