package usf

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/sf"
)

// fillK is sampler.fill that also writes the set indices of the z into
// b.K.
func (sp *sampler) fillK(b *Batch, rng *rand.Rand) {
	sp.fill(b, rng)
	d := sp.p.phi.Dim()
	for i := range b.A {
		for k, z := range sp.zs {
			if equalVec(z, b.Z[i*d:(i+1)*d]) {
				b.K[i] = k
				break
			}
		}
	}
}

// argmaxSeq is the greedy action of psi(s', ., z) . z with the dot
// products summed left to right, ties to the lowest action, computed from
// the table itself (not from any cache).
func argmaxSeq(tab *sf.Table, s int, z []float64) int {
	best, arg := math.Inf(-1), 0
	for a := range tab.A {
		var q float64
		for j, v := range tab.Row(s, a) {
			q += v * z[j]
		}
		if q > best {
			best, arg = q, a
		}
	}
	return arg
}

// TestUpdateRelabelMatchesTD checks UpdateRelabel bit for bit against the
// library's reference learner: one sf.TD per z of the set (Sampled target
// at the greedy action of that z, the features given), driven through the
// same transitions and the same relabelling draws, with a step below 1 and
// the step 1 (the two arithmetic branches), on a random MDP with terminal
// states.
func TestUpdateRelabelMatchesTD(t *testing.T) {
	for _, alpha := range []float64{0.3, 1} {
		t.Run(fmt.Sprint("alpha=", alpha), func(t *testing.T) {
			p := randomProblem(t, 11, 9, 3, 4, 0.25)
			rng := rand.New(rand.NewPCG(4, 4))
			zs := unitVectors(rng, 5, 4)
			tab, err := NewTabular(9, 3, zs, p.gamma, &TabularConfig{Schedule: sf.StepSchedule{StepSize: alpha}})
			if err != nil {
				t.Fatal(err)
			}
			ref := make([]*sf.TD, len(zs))
			for k := range zs {
				rt, _ := sf.NewTable(9, 3, 4)
				ref[k], err = sf.NewTD(rt, p.phi, p.gamma, &sf.TDConfig{Target: sf.Sampled, Schedule: sf.StepSchedule{StepSize: alpha}})
				if err != nil {
					t.Fatal(err)
				}
			}
			const extra = 2
			draws := rand.New(rand.NewPCG(5, 5))
			mirror := rand.New(rand.NewPCG(5, 5))
			sp := newSampler(p, zs)
			b := NewBatch(16, 0, 4)
			b.K = make([]int, 16)
			var st TDStats
			for range 200 {
				sp.fillK(b, rng)
				if err := tab.UpdateRelabel(b, extra, &st, draws); err != nil {
					t.Fatal(err)
				}
				for i := range b.A {
					k := b.K[i]
					for j := 0; j <= extra; j++ {
						if j > 0 {
							k = mirror.IntN(len(zs))
						}
						an := -1
						if !b.Terminal[i] {
							an = argmaxSeq(ref[k].Table, b.Next[i], zs[k])
						}
						if err := ref[k].UpdateFeatures(b.S[i], b.A[i], b.Phi[i*4:(i+1)*4], b.Next[i], b.Terminal[i], an); err != nil {
							t.Fatal(err)
						}
					}
				}
			}
			for k := range zs {
				for i, v := range tab.Tables[k].Data {
					if math.Float64bits(v) != math.Float64bits(ref[k].Table.Data[i]) {
						t.Fatalf("z %d entry %d: %v, sf.TD %v", k, i, v, ref[k].Table.Data[i])
					}
				}
			}
			if want := 200 * 16 * (1 + extra); st.N != want || tab.Steps() != want {
				t.Errorf("%d updates counted, %d steps; want %d", st.N, tab.Steps(), want)
			}
		})
	}
}

// TestUpdateRelabelLearnsOptimal trains with relabelling on a random MDP
// with deterministic transitions and step 1 (asynchronous value iteration
// on the SFs, so the fixed point is reached to rounding) and compares
// psi(., ., z) with sf.Exact of an optimal policy for phi . z
// (mdp.Optimal), and the cached greedy action with that policy, as
// TestTabularMatchesExact does for Update. Tolerance 1e-6 relative.
func TestUpdateRelabelLearnsOptimal(t *testing.T) {
	p := randomProblemBranching(t, 5, 8, 3, 3, 1, 0.25)
	rng := rand.New(rand.NewPCG(5, 98))
	zs := wellSeparated(t, p, rng, 4, 3, 0.05)
	tab, err := NewTabular(8, 3, zs, p.gamma, &TabularConfig{Schedule: sf.StepSchedule{StepSize: 1}})
	if err != nil {
		t.Fatal(err)
	}
	// Only z_0 acts; the others learn from relabelling alone.
	sp := newSampler(p, zs[:1])
	b := NewBatch(32, 0, 3)
	b.K = make([]int, 32)
	for range 100_000 / 32 {
		sp.fillK(b, rng)
		if err := tab.UpdateRelabel(b, 3, nil, rng); err != nil {
			t.Fatal(err)
		}
	}
	for k, z := range zs {
		ref, opt := exactUSF(t, p, z)
		if e := psiError(tab, ref, p.m, z); e > 1e-6 {
			t.Errorf("z[%d]: relative max error %.3g > 1e-6", k, e)
		}
		for s, a := range opt {
			if !p.m.Terminal(s) && tab.Greedy(k, s) != a {
				t.Errorf("z[%d] state %d: cached greedy action %d, optimal %d", k, s, tab.Greedy(k, s), a)
			}
		}
	}
}

// TestTabularValuesCache checks that the cache of action values follows
// Update and UpdateRelabel exactly (equal to psi . z summed left to right
// from the tables), is rebuilt exactly after a save and load, and that
// training continued after the round trip equals uninterrupted training
// bit for bit.
func TestTabularValuesCache(t *testing.T) {
	p := randomProblem(t, 7, 7, 3, 3, 0.2)
	rng := rand.New(rand.NewPCG(7, 7))
	zs := unitVectors(rng, 3, 3)
	tab, _ := NewTabular(7, 3, zs, p.gamma, &TabularConfig{Schedule: sf.StepSchedule{StepSize: 0.5}})
	sp := newSampler(p, zs)
	b := NewBatch(8, 0, 3)
	b.K = make([]int, 8)
	check := func(what string, tab *Tabular) {
		t.Helper()
		for k, z := range zs {
			for s := range 7 {
				q := tab.Values(k, s)
				for a := range 3 {
					var want float64
					for j, v := range tab.Tables[k].Row(s, a) {
						want += v * z[j]
					}
					if math.Float64bits(q[a]) != math.Float64bits(want) {
						t.Fatalf("%s: Q(%d, %d, z_%d) = %v in the cache, %v from the table", what, s, a, k, q[a], want)
					}
				}
			}
		}
	}
	tab.Values(0, 0) // build the cache before Update, so Update must keep it
	for i := range 50 {
		sp.fillK(b, rng)
		if i%2 == 0 {
			if _, err := tab.Update(b); err != nil {
				t.Fatal(err)
			}
		} else if err := tab.UpdateRelabel(b, 1, nil, rng); err != nil {
			t.Fatal(err)
		}
	}
	check("trained", tab)
	data, err := tab.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	var back Tabular
	if err := back.UnmarshalBinary(data); err != nil {
		t.Fatal(err)
	}
	check("loaded", &back)
	r1 := rand.New(rand.NewPCG(8, 8))
	r2 := rand.New(rand.NewPCG(8, 8))
	for range 30 {
		sp.fillK(b, r1)
		sp.fillK(b, r2) // same batch again, keeping the two generators level
		if err := tab.UpdateRelabel(b, 2, nil, r1); err != nil {
			t.Fatal(err)
		}
		if err := back.UpdateRelabel(b, 2, nil, r2); err != nil {
			t.Fatal(err)
		}
	}
	for k := range zs {
		for i, v := range tab.Tables[k].Data {
			if math.Float64bits(v) != math.Float64bits(back.Tables[k].Data[i]) {
				t.Fatal("training after a save and load differs from uninterrupted training")
			}
		}
	}
}

// TestUpdateRelabelHand checks one update and the TD-error statistic by
// hand, on the two-state chain of TestTabularHandExample (gamma 0.5, step
// 0.5); derived by hand, see comments.
func TestUpdateRelabelHand(t *testing.T) {
	z := []float64{1, 0}
	tab, _ := NewTabular(2, 2, [][]float64{z}, 0.5, &TabularConfig{Schedule: sf.StepSchedule{StepSize: 0.5}})
	copy(tab.Tables[0].Row(1, 0), []float64{2, 0}) // Q(1, 0) = 2
	copy(tab.Tables[0].Row(1, 1), []float64{0, 4}) // Q(1, 1) = 0: the greedy action in 1 is 0
	if g := tab.Greedy(0, 1); g != 0 {
		t.Fatalf("greedy action %d, want 0", g)
	}
	b := NewBatch(1, 0, 2)
	b.K = []int{0}
	b.S[0], b.A[0], b.Next[0] = 0, 1, 1
	copy(b.Phi, []float64{1, 1})
	var st TDStats
	// target = phi + 0.5 psi(1, 0) = (2, 1); delta = (2, 1);
	// psi(0, 1) = 0.5 delta = (1, 0.5); ||delta||^2 / d = 5/2.
	if err := tab.UpdateRelabel(b, 0, &st, nil); err != nil {
		t.Fatal(err)
	}
	if r := tab.Tables[0].Row(0, 1); r[0] != 1 || r[1] != 0.5 {
		t.Errorf("psi(0, 1) = %v, want [1 0.5]", r)
	}
	if q := tab.Values(0, 0); q[1] != 1 || q[0] != 0 {
		t.Errorf("Q(0, .) = %v, want [0 1]", q)
	}
	if st.N != 1 || st.Mean() != 2.5 {
		t.Errorf("statistic %+v (mean %v), want one update of 2.5", st, st.Mean())
	}
	// A terminal next state bootstraps nothing: target = phi = (1, 1),
	// delta = (0, 0.5), psi(0, 1) = (1, 0.75), ||delta||^2 / d = 1/8.
	b.Terminal[0] = true
	if err := tab.UpdateRelabel(b, 0, &st, nil); err != nil {
		t.Fatal(err)
	}
	if r := tab.Tables[0].Row(0, 1); r[0] != 1 || r[1] != 0.75 {
		t.Errorf("psi(0, 1) = %v, want [1 0.75]", r)
	}
	if st.N != 2 || st.SumSq != 2.5+0.125 {
		t.Errorf("statistic %+v, want sum 2.625 over 2", st)
	}
}

// TestUpdateRelabelErrors checks divergence and the documented panics.
func TestUpdateRelabelErrors(t *testing.T) {
	z := []float64{1, 0}
	tab, _ := NewTabular(2, 2, [][]float64{z}, 0.5, nil)
	b := NewBatch(1, 0, 2)
	b.K = []int{0}
	b.S[0], b.A[0], b.Next[0] = 0, 1, 1
	b.Phi[0] = math.Inf(1)
	err := tab.UpdateRelabel(b, 0, nil, nil)
	var de *sf.DivergenceError
	if !errors.Is(err, ErrDiverged) || !errors.As(err, &de) || de.Step != 1 || de.State != 0 || de.Action != 1 {
		t.Fatalf("error %v, want a divergence at update 1 of (0, 1)", err)
	}
	b.Phi[0] = 0
	if err2 := tab.UpdateRelabel(b, 0, nil, nil); !errors.Is(err2, ErrDiverged) {
		t.Errorf("after divergence: %v", err2)
	}

	tab, _ = NewTabular(2, 2, [][]float64{z}, 0.5, nil)
	for _, tc := range []struct {
		name  string
		f     func(b *Batch)
		extra int
		rng   *rand.Rand
	}{
		{"no S", func(b *Batch) { b.S = nil }, 0, nil},
		{"index out of range", func(b *Batch) { b.K = []int{1} }, 0, nil},
		{"state out of range", func(b *Batch) { b.Next = []int{2} }, 0, nil},
		{"negative extra", func(b *Batch) {}, -1, nil},
		{"extra without rng", func(b *Batch) {}, 1, nil},
		{"z not in the set", func(b *Batch) { b.K = nil; b.Z = []float64{0, 1} }, 0, nil},
	} {
		b := NewBatch(1, 0, 2)
		b.K = []int{0}
		copy(b.Z, z)
		tc.f(b)
		if !panics(func() { tab.UpdateRelabel(b, tc.extra, nil, tc.rng) }) {
			t.Errorf("%s: no panic", tc.name)
		}
	}
}

// TestUpdateRelabelAllocs checks that UpdateRelabel, Values and Greedy
// allocate nothing once the cache is built.
func TestUpdateRelabelAllocs(t *testing.T) {
	p := randomProblem(t, 2, 10, 4, 8, 0.1)
	rng := rand.New(rand.NewPCG(2, 2))
	zs := unitVectors(rng, 16, 8)
	tab, _ := NewTabular(10, 4, zs, p.gamma, &TabularConfig{Schedule: sf.StepSchedule{StepSize: 0.2}})
	b := NewBatch(16, 0, 8)
	b.K = make([]int, 16)
	newSampler(p, zs).fillK(b, rng)
	var st TDStats
	tab.Greedy(0, 0)
	if n := testing.AllocsPerRun(100, func() {
		if err := tab.UpdateRelabel(b, 4, &st, rng); err != nil {
			t.Fatal(err)
		}
		_ = tab.Greedy(3, 5) + len(tab.Values(2, 1))
	}); n != 0 {
		t.Errorf("%v allocations per call, want 0", n)
	}
}

// BenchmarkTabularUpdateRelabel is one minibatch of 16 transitions, each
// updating the acting z and 4 relabelled ones, with the sizes of the depot
// demo (d = 64, 128 skills) on 200 states and 5 actions.
func BenchmarkTabularUpdateRelabel(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 1))
	const states, actions, d, k = 200, 5, 64, 128
	zs := unitVectors(rng, k, d)
	tab, err := NewTabular(states, actions, zs, 0.99, &TabularConfig{Schedule: sf.StepSchedule{StepSize: 0.2}})
	if err != nil {
		b.Fatal(err)
	}
	bt := NewBatch(16, 0, d)
	bt.K = make([]int, 16)
	for i := range 16 {
		bt.S[i], bt.A[i], bt.Next[i], bt.K[i] = rng.IntN(states), rng.IntN(actions), rng.IntN(states), rng.IntN(k)
		for j := range d {
			bt.Phi[i*d+j] = rng.NormFloat64() / 8
		}
	}
	var st TDStats
	tab.Greedy(0, 0)
	b.ReportAllocs()
	for b.Loop() {
		if err := tab.UpdateRelabel(bt, 4, &st, rng); err != nil {
			b.Fatal(err)
		}
	}
}
