package sf

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/internal/vec"
	"github.com/successor-go/successor/mdp"
)

// randomWalk returns the random walk of Sutton & Barto, Reinforcement
// Learning 2nd ed., Example 6.2: states 0..6, with 0 and 6 terminal and
// 1..5 the non-terminal states A..E; every episode starts in C (state 3).
// Action 0 moves left and action 1 right; the textbook's walk is the
// uniform policy over the two.
func randomWalk(t testing.TB) *mdp.Finite {
	t.Helper()
	var tr []mdp.ProbEntry
	for s := 1; s <= 5; s++ {
		tr = append(tr,
			mdp.ProbEntry{State: s, Action: 0, Next: s - 1, Prob: 1},
			mdp.ProbEntry{State: s, Action: 1, Next: s + 1, Prob: 1})
	}
	term := []bool{true, false, false, false, false, false, true}
	start := []float64{0, 0, 0, 1, 0, 0, 0}
	m, err := mdp.New(7, 2, tr, term, start)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// randomMDP returns a seeded random MDP from mdp.RandomFinite.
func randomMDP(t testing.TB, seed uint64, cfg *mdp.RandomConfig) *mdp.Finite {
	t.Helper()
	m, err := mdp.RandomFinite(cfg, rand.New(rand.NewPCG(seed, 99)))
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// maxAbsDiff returns max_i |x[i] - y[i]| and max_i |y[i]|.
func maxAbsDiff(x, y []float64) (diff, scale float64) {
	for i := range x {
		diff = math.Max(diff, math.Abs(x[i]-y[i]))
		scale = math.Max(scale, math.Abs(y[i]))
	}
	return diff, scale
}

// rewardOf returns the reward r(s,a,s') = phi(s,a,s') . w.
func rewardOf(phi FeatureMap, w []float64) mdp.Reward {
	f := make([]float64, phi.Dim())
	return func(s, a, next int) float64 {
		phi.Features(f, s, a, next)
		return vec.Dot(f, w)
	}
}
