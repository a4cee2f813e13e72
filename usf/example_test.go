package usf_test

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
	"github.com/successor-go/successor/usf"
)

// A two-state world: action 0 moves to the other state, action 1 stays.
// The features are the one-hot next state, phi(s, a, s') = e_{s'}, so
// z = (1, 0) pays for being in state 0 next. With gamma 0.5 the optimal
// policy of z = (1, 0) stays in state 0 and moves there from state 1, and
// its SFs are (derived by hand from psi = phi + gamma psi(s', a*)):
//
//	psi(0, move) = e_1 + 0.5 psi(1, move) = (1, 1)
//	psi(0, stay) = e_0 + 0.5 psi(0, stay) = (2, 0)
//
// A Tabular over the set {(1, 0), (0, 1)} learns them, for both z at once.
func ExampleTabular() {
	m, err := mdp.New(2, 2, []mdp.ProbEntry{
		{State: 0, Action: 0, Next: 1, Prob: 1},
		{State: 0, Action: 1, Next: 0, Prob: 1},
		{State: 1, Action: 0, Next: 0, Prob: 1},
		{State: 1, Action: 1, Next: 1, Prob: 1},
	}, nil, []float64{1, 0})
	if err != nil {
		fmt.Println(err)
		return
	}
	zs := [][]float64{{1, 0}, {0, 1}}
	tab, err := usf.NewTabular(2, 2, zs, 0.5, &usf.TabularConfig{Schedule: sf.StepSchedule{StepSize: 0.5}})
	if err != nil {
		fmt.Println(err)
		return
	}
	// One batch holds every (s, a) pair for both z; observations are
	// one-hot states given as indices.
	b := usf.NewBatch(8, 0, 2)
	i := 0
	for _, z := range zs {
		for s := 0; s < 2; s++ {
			for a := 0; a < 2; a++ {
				next, _ := m.Next(s, a)
				b.S[i], b.A[i], b.Next[i] = s, a, next[0]
				b.Phi[2*i+next[0]] = 1
				copy(b.Z[2*i:2*i+2], z)
				i++
			}
		}
	}
	for range 200 {
		if _, err := tab.Update(b); err != nil {
			fmt.Println(err)
			return
		}
	}
	psi := make([]float64, 4)
	tab.PsiState(psi, 0, []float64{1, 0})
	fmt.Printf("psi(0, move, z) = [%.3f %.3f]\n", psi[0], psi[1])
	fmt.Printf("psi(0, stay, z) = [%.3f %.3f]\n", psi[2], psi[3])
	// Output:
	// psi(0, move, z) = [1.000 1.000]
	// psi(0, stay, z) = [2.000 0.000]
}

// Candidates builds a GPI candidate set around an inferred task vector:
// w itself first, then unit vectors drawn around its direction (here von
// Mises-Fisher with concentration 100: mean cosine coth(100) - 1/100 =
// 0.99 to w/||w|| in three dimensions).
func ExampleCandidates() {
	w := []float64{0, 3, 4}
	rng := rand.New(rand.NewPCG(1, 2))
	set, err := usf.Candidates(w, &usf.CandidateConfig{N: 4, Kappa: 100}, rng)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(len(set), set[0])
	for _, z := range set[1:] {
		norm := math.Sqrt(z[0]*z[0] + z[1]*z[1] + z[2]*z[2])
		cos := (0.6*z[1] + 0.8*z[2]) / norm
		fmt.Printf("unit %v, close to w %v\n", math.Abs(norm-1) < 1e-12, cos > 0.9)
	}
	// Output:
	// 5 [0 3 4]
	// unit true, close to w true
	// unit true, close to w true
	// unit true, close to w true
	// unit true, close to w true
}

// A replay of dimension 0 keeps, instead of phi and z, the index of z in
// the set of a Tabular; the caller writes phi after sampling and the
// Tabular reads the indices from Batch.K. The world and the features are
// those of ExampleTabular (derived by hand there): the SFs of z = (1, 0)
// in state 0 are (1, 1) for move and (2, 0) for stay.
func ExampleReplay_Entry() {
	zs := [][]float64{{1, 0}, {0, 1}}
	tab, err := usf.NewTabular(2, 2, zs, 0.5, &usf.TabularConfig{Schedule: sf.StepSchedule{StepSize: 1}})
	if err != nil {
		fmt.Println(err)
		return
	}
	rep, err := usf.NewReplay(100, 0, 0)
	if err != nil {
		fmt.Println(err)
		return
	}
	for k := range zs {
		for s := 0; s < 2; s++ {
			for a := 0; a < 2; a++ {
				next := s // stay
				if a == 0 {
					next = 1 - s // move
				}
				rep.Add(&usf.Entry{S: s, A: a, Next: next, NextA: -1, K: k})
			}
		}
	}
	fmt.Println("stored:", rep.Len(), "valid:", rep.Validate(2, 2, len(zs)))
	var tr usf.Entry
	rep.Entry(&tr, rep.Len()-1)
	fmt.Printf("newest: s=%d a=%d s'=%d k=%d\n", tr.S, tr.A, tr.Next, tr.K)

	b := usf.NewBatch(16, 0, 2)
	b.K = make([]int, 16)
	rng := rand.New(rand.NewPCG(1, 2))
	for range 200 {
		rep.Sample(b, rng)
		for i, next := range b.Next { // phi(s, a, s') = e_{s'}
			clear(b.Phi[2*i : 2*i+2])
			b.Phi[2*i+next] = 1
		}
		if _, err := tab.Update(b); err != nil {
			fmt.Println(err)
			return
		}
	}
	psi := make([]float64, 4)
	tab.PsiState(psi, 0, zs[0])
	fmt.Printf("psi(0, move) = %.3f, psi(0, stay) = %.3f\n", psi[0:2], psi[2:4])
	// Output:
	// stored: 8 valid: <nil>
	// newest: s=1 a=1 s'=1 k=1
	// psi(0, move) = [1.000 1.000], psi(0, stay) = [2.000 0.000]
}
