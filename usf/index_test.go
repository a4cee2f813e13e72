package usf

import (
	"bytes"
	"fmt"
	"maps"
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

// scanIndex is the reference look-up: the first k with Z[k] equal to z,
// component by component with ==, by a linear scan (the definition of
// Index; common practice).
func scanIndex(zs [][]float64, z []float64) int {
	for k, zk := range zs {
		if len(zk) != len(z) {
			continue
		}
		eq := true
		for j, v := range zk {
			if v != z[j] {
				eq = false
				break
			}
		}
		if eq {
			return k
		}
	}
	return -1
}

// indexSets returns seeded test sets: random unit vectors, the standard
// basis (the one-hot skill vectors of a categorical prior, whose bit
// patterns differ in one word only), vectors on a coarse grid (many
// shared components), and a set with duplicates and signed zeros.
func indexSets() map[string][][]float64 {
	rng := rand.New(rand.NewPCG(21, 21))
	sets := map[string][][]float64{
		"unit/K=128,d=8":  unitVectors(rng, 128, 8),
		"unit/K=300,d=3":  unitVectors(rng, 300, 3),
		"unit/K=1,d=1":    unitVectors(rng, 1, 1),
		"duplicates/zero": {{0, 1}, {1, 0}, {0, 1}, {math.Copysign(0, -1), 1}, {math.Copysign(0, -1), 2}, {1, 0}},
	}
	basis := make([][]float64, 64)
	for k := range basis {
		basis[k] = make([]float64, 64)
		basis[k][k] = 1
	}
	sets["basis/K=64,d=64"] = basis
	var grid [][]float64
	for i := 0; i < 5; i++ {
		for j := 0; j < 5; j++ {
			for l := 0; l < 5; l++ {
				grid = append(grid, []float64{float64(i) / 4, float64(j) / 4, float64(l) / 4, 0.5, 0.5})
			}
		}
	}
	sets["grid/K=125,d=5"] = grid
	return sets
}

// TestTabularIndexMatchesScan checks the hashed Index against the linear
// scan for every member of each set, for near misses (one component moved
// by one ulp, math.Nextafter), for a negated zero, for NaN and for a wrong
// length, on a new and on a loaded Tabular.
func TestTabularIndexMatchesScan(t *testing.T) {
	sets := indexSets()
	for _, name := range slices.Sorted(maps.Keys(sets)) {
		zs := sets[name]
		t.Run(name, func(t *testing.T) {
			d := len(zs[0])
			tab, err := NewTabular(2, 2, zs, 0.9, nil)
			if err != nil {
				t.Fatal(err)
			}
			var loaded Tabular
			if err := loaded.UnmarshalBinary(mustMarshal(t, tab)); err != nil {
				t.Fatal(err)
			}
			var queries [][]float64
			for _, z := range zs {
				queries = append(queries, z)
				for j := range z {
					q := append([]float64(nil), z...)
					q[j] = math.Nextafter(q[j], 2)
					queries = append(queries, q)
					if z[j] == 0 {
						q = append([]float64(nil), z...)
						q[j] = math.Copysign(0, -math.Copysign(1, z[j]))
						queries = append(queries, q)
					}
				}
			}
			nan := make([]float64, d)
			nan[0] = math.NaN()
			queries = append(queries, nan, make([]float64, d+1), nil)
			for _, q := range queries {
				want := scanIndex(zs, q)
				if got := tab.Index(q); got != want {
					t.Fatalf("Index(%v) = %d, want %d (scan)", q, got, want)
				}
				if got := loaded.Index(q); got != want {
					t.Fatalf("loaded: Index(%v) = %d, want %d (scan)", q, got, want)
				}
			}
		})
	}
	// The hash reads one position for vectors in general position and d-1
	// for the standard basis (see buildIndex).
	for _, tc := range []struct {
		name string
		keys int
	}{{"unit/K=128,d=8", 1}, {"basis/K=64,d=64", 63}, {"grid/K=125,d=5", 3}, {"duplicates/zero", 2}} {
		tab, _ := NewTabular(2, 2, indexSets()[tc.name], 0.9, nil)
		if len(tab.keys) != tc.keys {
			t.Errorf("%s: %d key positions %v, want %d", tc.name, len(tab.keys), tab.keys, tc.keys)
		}
	}
	same, _ := NewTabular(2, 2, [][]float64{{1, 2}, {1, 2}}, 0.9, nil)
	if len(same.keys) != 0 || same.Index([]float64{1, 2}) != 0 || same.Index([]float64{1, 3}) != -1 {
		t.Error("set of one repeated vector")
	}
	var zero Tabular
	if zero.Index([]float64{1}) != -1 {
		t.Error("zero Tabular found a z")
	}
}

// TestTabularBatchK checks that a batch giving the set indices K (with Z
// nil) updates bit for bit as the same batch giving Z, and that bad
// indices panic.
func TestTabularBatchK(t *testing.T) {
	p := randomProblem(t, 22, 6, 2, 3, 0.2)
	rng := rand.New(rand.NewPCG(22, 22))
	zs := unitVectors(rng, 5, 3)
	a, _ := NewTabular(6, 2, zs, p.gamma, nil)
	c, _ := NewTabular(6, 2, zs, p.gamma, nil)
	sp := newSampler(p, zs)
	b := NewBatch(16, 0, 3)
	bk := *b
	bk.Z = nil
	bk.K = make([]int, 16)
	for range 40 {
		sp.fill(b, rng)
		for i := range bk.K {
			bk.K[i] = scanIndex(zs, b.Z[i*3:(i+1)*3])
		}
		bk.S, bk.Next, bk.A, bk.Phi, bk.Terminal = b.S, b.Next, b.A, b.Phi, b.Terminal
		la, err1 := a.Update(b)
		lc, err2 := c.Update(&bk)
		if err1 != nil || err2 != nil || la != lc {
			t.Fatalf("loss %v vs %v (%v, %v)", la, lc, err1, err2)
		}
	}
	if !bytes.Equal(mustMarshal(t, a), mustMarshal(t, c)) {
		t.Error("updates by z and by index differ")
	}
	bk.K[3] = 5
	if !panics(func() { c.Update(&bk) }) {
		t.Error("index 5 of a set of 5 accepted")
	}
	bk.K = bk.K[:15]
	if !panics(func() { c.Update(&bk) }) {
		t.Error("K of the wrong length accepted")
	}
	// Neural ignores K and needs Z.
	nn, err := NewNeural(6, 2, 3, p.gamma, nil, rand.New(rand.NewPCG(1, 1)))
	if err != nil {
		t.Fatal(err)
	}
	bk.K = make([]int, 16)
	if !panics(func() { nn.Update(&bk) }) {
		t.Error("neural accepted a batch without Z")
	}
}

func TestTabularZeroAllocs(t *testing.T) {
	p := randomProblem(t, 23, 6, 2, 3, 0.2)
	rng := rand.New(rand.NewPCG(23, 23))
	zs := unitVectors(rng, 40, 3)
	tab, _ := NewTabular(6, 2, zs, p.gamma, nil)
	sp := newSampler(p, zs)
	b := NewBatch(8, 0, 3)
	sp.fill(b, rng)
	bk := *b
	bk.K = make([]int, 8)
	var sink int
	if n := testing.AllocsPerRun(20, func() {
		sink += tab.Index(zs[17])
		tab.Update(b)
		tab.Update(&bk)
	}); n != 0 {
		t.Fatalf("%v allocs, want 0", n)
	}
	_ = sink
}

// tabularBench returns a tabular USF with K random unit z in R^d (S =
// 1000, A = 4) and a batch of 64 transitions with K[i] set to the index of
// z_i (K is nil in the returned batch; the caller sets it).
func tabularBench(k, d int) (*Tabular, *Batch, []int) {
	rng := rand.New(rand.NewPCG(6, 6))
	const ns, na, n = 1000, 4, 64
	zs := unitVectors(rng, k, d)
	tab, _ := NewTabular(ns, na, zs, 0.95, nil)
	bt := NewBatch(n, 0, d)
	idx := make([]int, n)
	for i := range bt.A {
		bt.S[i], bt.Next[i], bt.A[i] = rng.IntN(ns), rng.IntN(ns), rng.IntN(na)
		idx[i] = rng.IntN(k)
		copy(bt.Z[i*d:(i+1)*d], zs[idx[i]])
		bt.Phi[i*d+rng.IntN(d)] = 1
	}
	return tab, bt, idx
}

// BenchmarkTabularUpdate is one batch of 64 online TD updates of the
// tabular USF (S = 1000, A = 4, greedy next actions) over K skills in
// R^d, each z given as a vector (by=z, looked up) or as its set index
// (by=K); reported per batch.
func BenchmarkTabularUpdate(b *testing.B) {
	for _, d := range []int{8, 64} {
		for _, k := range []int{16, 128} {
			for _, byK := range []bool{false, true} {
				by := "z"
				if byK {
					by = "K"
				}
				b.Run(fmt.Sprintf("K=%d,d=%d,by=%s", k, d, by), func(b *testing.B) {
					tab, bt, idx := tabularBench(k, d)
					if byK {
						bt.K = idx
					}
					b.ReportAllocs()
					for b.Loop() {
						if _, err := tab.Update(bt); err != nil {
							b.Fatal(err)
						}
					}
				})
			}
		}
	}
}

// BenchmarkTabularIndex looks up 64 vectors of a set of K: the hash table
// (Index) against the linear scan it replaced (scanIndex).
func BenchmarkTabularIndex(b *testing.B) {
	for _, d := range []int{8, 64} {
		for _, k := range []int{16, 128} {
			tab, bt, _ := tabularBench(k, d)
			b.Run(fmt.Sprintf("K=%d,d=%d/hash", k, d), func(b *testing.B) {
				var sink int
				b.ReportAllocs()
				for b.Loop() {
					for i := 0; i < 64; i++ {
						sink += tab.Index(bt.Z[i*d : (i+1)*d])
					}
				}
				_ = sink
			})
			b.Run(fmt.Sprintf("K=%d,d=%d/scan", k, d), func(b *testing.B) {
				var sink int
				b.ReportAllocs()
				for b.Loop() {
					for i := 0; i < 64; i++ {
						sink += scanIndex(tab.Z, bt.Z[i*d:(i+1)*d])
					}
				}
				_ = sink
			})
		}
	}
}
