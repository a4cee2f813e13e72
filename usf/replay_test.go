package usf

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestReplayRing checks that the ring keeps the newest Cap transitions and
// copies what it is given.
func TestReplayRing(t *testing.T) {
	r, err := NewReplay(4, 2, 1)
	if err != nil {
		t.Fatal(err)
	}
	x, nx, phi, z := []float64{0, 0}, []float64{0, 0}, []float64{0}, []float64{1}
	for i := 0; i < 10; i++ {
		x[0], nx[0], phi[0] = float64(i), float64(i+1), float64(-i)
		r.Add(&Entry{S: i, A: i % 3, Next: i + 1, NextA: -1, Terminal: i%2 == 0, X: x, NextX: nx, Phi: phi, Z: z})
	}
	x[0] = 99 // the replay holds copies
	if r.Len() != 4 || r.Added() != 10 || r.Cap() != 4 {
		t.Fatalf("len %d added %d cap %d", r.Len(), r.Added(), r.Cap())
	}
	b := NewBatch(200, 2, 1)
	r.Sample(b, rand.New(rand.NewPCG(1, 1)))
	seen := map[int]bool{}
	for i, s := range b.S {
		if s < 6 || s > 9 {
			t.Fatalf("sampled transition %d, want one of the newest four (6..9)", s)
		}
		seen[s] = true
		if b.Next[i] != s+1 || b.A[i] != s%3 || b.Terminal[i] != (s%2 == 0) || b.X[2*i] != float64(s) ||
			b.NextX[2*i] != float64(s+1) || b.Phi[i] != float64(-s) || b.Z[i] != 1 || b.NextA[i] != -1 {
			t.Fatalf("sample %d: fields do not belong together", i)
		}
	}
	if len(seen) != 4 {
		t.Errorf("saw %d distinct transitions in 200 draws, want 4", len(seen))
	}
	if !panics(func() { r.Add(&Entry{Phi: []float64{1, 2}, Z: z, X: x, NextX: nx}) }) {
		t.Error("wrong feature length accepted")
	}
	empty, _ := NewReplay(3, 0, 1)
	if !panics(func() { empty.Sample(NewBatch(1, 0, 1), rand.New(rand.NewPCG(1, 1))) }) {
		t.Error("sampling an empty replay must panic")
	}
}

// TestReplayUniform checks uniform sampling with a chi-square test: 10
// stored transitions, 20000 draws, 9 degrees of freedom; the 0.999
// quantile of chi-square(9) is 27.88 (standard tables, e.g. NIST/SEMATECH
// e-Handbook, Table 1.3.6.7.4).
func TestReplayUniform(t *testing.T) {
	r, _ := NewReplay(10, 0, 1)
	for i := 0; i < 10; i++ {
		r.Add(&Entry{S: i, Phi: []float64{0}, Z: []float64{0}})
	}
	b := NewBatch(20000, 0, 1)
	r.Sample(b, rand.New(rand.NewPCG(2, 2)))
	var count [10]float64
	for _, s := range b.S {
		count[s]++
	}
	var chi2 float64
	for _, c := range count {
		chi2 += (c - 2000) * (c - 2000) / 2000
	}
	if chi2 > 27.88 || math.IsNaN(chi2) {
		t.Errorf("chi-square %v > 27.88: counts %v", chi2, count)
	}
}

func TestReplayZeroAllocs(t *testing.T) {
	r, _ := NewReplay(100, 8, 4)
	tr := &Entry{X: make([]float64, 8), NextX: make([]float64, 8), Phi: make([]float64, 4), Z: make([]float64, 4)}
	b := NewBatch(32, 8, 4)
	rng := rand.New(rand.NewPCG(3, 3))
	if n := testing.AllocsPerRun(10, func() {
		r.Add(tr)
		r.Sample(b, rng)
	}); n != 0 {
		t.Fatalf("%v allocs, want 0", n)
	}
}
