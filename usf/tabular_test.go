package usf

import (
	"errors"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/sf"
)

// TestTabularMatchesExact trains the tabular USF on seeded random MDPs and
// checks psi(., ., z) for each z of the set against sf.Exact of an optimal
// policy for phi . z (at the fixed point the greedy policy of z is
// optimal), as max |psi - exact| / max |exact| over non-terminal states;
// and that the learned greedy policy of z is that optimal policy. The z
// are drawn with a relative action gap of at least 5% (see wellSeparated).
//
// Tolerances: with deterministic transitions and step 1 the update is
// asynchronous value iteration on the SFs, which converges geometrically:
// 1e-6. With three successors per pair the TD noise with the step
// 1/n^0.7 after about 1.6M updates (16k per (z, s, a)) leaves a few
// percent: 5% (measured 0.6-1.3%; 2-3.8% with terminal states).
func TestTabularMatchesExact(t *testing.T) {
	for _, tc := range []struct {
		name      string
		seed      uint64
		branching int
		terminal  float64
		step      sf.StepSchedule
		updates   int
		tol       float64
	}{
		{"deterministic", 5, 1, 0.25, sf.StepSchedule{StepSize: 1}, 100_000, 1e-6},
		{"continuing", 1, 3, 0, sf.StepSchedule{StepSize: 1, Power: 0.7}, 1_600_000, 0.05},
	} {
		t.Run(tc.name, func(t *testing.T) {
			p := randomProblemBranching(t, tc.seed, 8, 3, 3, tc.branching, tc.terminal)
			rng := rand.New(rand.NewPCG(tc.seed, 99))
			zs := wellSeparated(t, p, rng, 4, 3, 0.05)
			tab, err := NewTabular(8, 3, zs, p.gamma, &TabularConfig{Schedule: tc.step})
			if err != nil {
				t.Fatal(err)
			}
			sp := newSampler(p, zs)
			b := NewBatch(32, 0, 3)
			for range tc.updates / 32 {
				sp.fill(b, rng)
				if _, err := tab.Update(b); err != nil {
					t.Fatal(err)
				}
			}
			for k, z := range zs {
				ref, opt := exactUSF(t, p, z)
				if e := psiError(tab, ref, p.m, z); e > tc.tol {
					t.Errorf("z[%d]: relative max error %.3g > %g", k, e, tc.tol)
				} else {
					t.Logf("z[%d]: relative max error %.3g", k, e)
				}
				checkGreedy(t, tab, opt, p, z)
			}
		})
	}
}

// TestTabularOneHotBatch checks that a batch given as one-hot X and NextX
// updates exactly as the same batch given as S and Next.
func TestTabularOneHotBatch(t *testing.T) {
	p := randomProblem(t, 3, 6, 2, 2, 0.2)
	rng := rand.New(rand.NewPCG(3, 3))
	zs := unitVectors(rng, 2, 2)
	a, _ := NewTabular(6, 2, zs, p.gamma, nil)
	c, _ := NewTabular(6, 2, zs, p.gamma, nil)
	sp := newSampler(p, zs)
	b := NewBatch(16, 6, 2)
	for range 50 {
		sp.fill(b, rng)
		la, _ := a.Update(b) // reads S, Next
		bx := *b
		bx.S, bx.Next = nil, nil
		lc, _ := c.Update(&bx) // reads X, NextX
		if la != lc {
			t.Fatalf("loss %v vs %v", la, lc)
		}
	}
	for k := range zs {
		for i, v := range a.Tables[k].Data {
			if v != c.Tables[k].Data[i] {
				t.Fatal("one-hot and indexed batches differ")
			}
		}
	}
	x := make([]float64, 6)
	x[4] = 1
	d1, d2 := make([]float64, 4), make([]float64, 4)
	a.Psi(d1, x, zs[1])
	a.PsiState(d2, 4, zs[1])
	for i := range d1 {
		if d1[i] != d2[i] {
			t.Fatal("Psi and PsiState differ")
		}
	}
	x[2] = 0.5
	if !panics(func() { a.Psi(d1, x, zs[1]) }) {
		t.Error("Psi accepted an observation that is not one-hot")
	}
	if !panics(func() { a.PsiState(d1, 0, []float64{1, 0}) }) {
		t.Error("PsiState accepted a z outside the set")
	}
}

// TestTabularHandExample checks one update against a hand computation:
// gamma 0.5, step 0.5, a two-state chain; derived by hand, see comment.
func TestTabularHandExample(t *testing.T) {
	z := []float64{1, 0}
	tab, _ := NewTabular(2, 2, [][]float64{z}, 0.5, &TabularConfig{Schedule: sf.StepSchedule{StepSize: 0.5}})
	// psi(1, 0) = (2, 0), psi(1, 1) = (0, 4): greedy in psi . z picks action 0.
	copy(tab.Tables[0].Row(1, 0), []float64{2, 0})
	copy(tab.Tables[0].Row(1, 1), []float64{0, 4})
	b := NewBatch(1, 0, 2)
	b.S[0], b.A[0], b.Next[0] = 0, 1, 1
	copy(b.Phi, []float64{1, 1})
	copy(b.Z, z)
	// target = phi + 0.5 psi(1, 0) = (2, 1); delta = (2, 1); psi(0,1) = 0.5 delta = (1, 0.5).
	loss, err := tab.Update(b)
	if err != nil {
		t.Fatal(err)
	}
	if loss != 2.5 { // (4 + 1)/2
		t.Errorf("loss %v, want 2.5", loss)
	}
	if r := tab.Tables[0].Row(0, 1); r[0] != 1 || r[1] != 0.5 {
		t.Errorf("psi(0, 1) = %v, want [1 0.5]", r)
	}
	// With the next action given as 1: target = (1, 1) + 0.5 (0, 4) = (1, 3).
	b.NextA[0] = 1
	tab.Update(b)
	if r := tab.Tables[0].Row(0, 1); r[0] != 1 || r[1] != 1.75 { // (1, 0.5) + 0.5 (0, 2.5)
		t.Errorf("psi(0, 1) = %v, want [1 1.75]", r)
	}
	// A terminal next state bootstraps nothing: target = phi = (1, 1).
	b.Terminal[0] = true
	tab.Update(b)
	if r := tab.Tables[0].Row(0, 1); r[0] != 1 || r[1] != 1.375 {
		t.Errorf("psi(0, 1) = %v, want [1 1.375]", r)
	}
}

func TestNewTabularErrors(t *testing.T) {
	z := [][]float64{{1, 0}}
	for _, tc := range []struct {
		name string
		err  error
		f    func() error
	}{
		{"gamma", ErrDiscount, func() error { _, err := NewTabular(2, 2, z, 1.5, nil); return err }},
		{"empty", ErrDimension, func() error { _, err := NewTabular(2, 2, nil, 0.9, nil); return err }},
		{"ragged", ErrDimension, func() error { _, err := NewTabular(2, 2, [][]float64{{1}, {1, 2}}, 0.9, nil); return err }},
		{"states", ErrDimension, func() error { _, err := NewTabular(0, 2, z, 0.9, nil); return err }},
		{"step", ErrConfig, func() error {
			_, err := NewTabular(2, 2, z, 0.9, &TabularConfig{Schedule: sf.StepSchedule{Power: 2}})
			return err
		}},
	} {
		if err := tc.f(); !errors.Is(err, tc.err) {
			t.Errorf("%s: err %v, want %v", tc.name, err, tc.err)
		}
	}
}
