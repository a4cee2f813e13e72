package skills

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/internal/vec"
)

// A 5x5 grid (invented for this test); cell (r, c) is state 5r + c. Four
// hand-made skills start in the centre (2, 2) and walk to the four corners
// along fixed paths whose first moves differ, so the states reached after
// each step (the next states s') of different skills never coincide.
const gridSide = 5

var gridMoves = [4][4][2]int{
	{{0, -1}, {-1, 0}, {0, -1}, {-1, 0}}, // left, up, left, up    -> (0, 0)
	{{-1, 0}, {0, 1}, {-1, 0}, {0, 1}},   // up, right, up, right  -> (0, 4)
	{{0, 1}, {1, 0}, {0, 1}, {1, 0}},     // right, down, ...      -> (4, 4)
	{{1, 0}, {0, -1}, {1, 0}, {0, -1}},   // down, left, ...       -> (4, 0)
}

// gridStep moves from state s by (dr, dc), staying put at a wall.
func gridStep(s int, m [2]int) int {
	r, c := s/gridSide+m[0], s%gridSide+m[1]
	if r < 0 || r >= gridSide || c < 0 || c >= gridSide {
		return s
	}
	return r*gridSide + c
}

// gridRollout returns the next states s_1..s_4 of skill k's episode.
func gridRollout(k int) [4]int {
	var out [4]int
	s := 2*gridSide + 2
	for t, m := range gridMoves[k] {
		s = gridStep(s, m)
		out[t] = s
	}
	return out
}

// gridBatch fills x (one-hot next states) and z (skill vectors from
// skills[k]) with n transitions of skills drawn uniformly.
func gridBatch(rng *rand.Rand, x, z []float64, n int, skills [][]float64) {
	d := len(skills[0])
	ns := gridSide * gridSide
	for i := range n {
		k := rng.IntN(len(skills))
		path := gridRollout(k)
		OneHot(x[i*ns:(i+1)*ns], path[rng.IntN(4)])
		copy(z[i*d:(i+1)*d], skills[k])
	}
}

// gridMI returns the MI estimate over every (next state, skill) pair of
// the four episodes, each pair once.
func gridMI(t *testing.T, d Discriminator, p Prior, skills [][]float64) MIEstimate {
	t.Helper()
	var m MIMeter
	x := make([]float64, gridSide*gridSide)
	for k := range skills {
		for _, s := range gridRollout(k) {
			OneHot(x, s)
			m.Add(d, p, x, skills[k])
		}
	}
	e, err := m.Estimate()
	if err != nil {
		t.Fatal(err)
	}
	return e
}

func TestGridPathsDisjoint(t *testing.T) {
	seen := map[int]int{}
	for k := range 4 {
		path := gridRollout(k)
		corner := [4]int{0, 4, 24, 20}[k]
		if path[3] != corner {
			t.Errorf("skill %d ends in %d, want corner %d", k, path[3], corner)
		}
		for _, s := range path {
			if j, ok := seen[s]; ok {
				t.Errorf("state %d reached by skills %d and %d", s, j, k)
			}
			seen[s] = k
		}
	}
}

func TestLearnGridSoftmax(t *testing.T) {
	// The four skills reach disjoint states, so a perfect discriminator
	// exists: accuracy should reach 1 and the MI bound log K = log 4
	// (Barber & Agakov bound; H(Z) = log 4 is its ceiling).
	const k, n = 4, 64
	ns := gridSide * gridSide
	skills := make([][]float64, k)
	for i := range skills {
		skills[i] = make([]float64, k)
		skills[i][i] = 1
	}
	p := Categorical{K: k}
	for _, net := range []NetConfig{{}, {Hidden: []int{16}, MaxBatch: 32}} {
		rng := rand.New(rand.NewPCG(7, 1))
		s, err := NewSoftmax(&SoftmaxConfig{In: ns, K: k, Net: net, Optim: OptimConfig{StepSize: 0.05}}, rng)
		if err != nil {
			t.Fatal(err)
		}
		before := gridMI(t, s, p, skills)
		x, z := make([]float64, n*ns), make([]float64, n*k)
		for range 150 {
			gridBatch(rng, x, z, n, skills)
			if _, err := s.Update(x, z); err != nil {
				t.Fatal(err)
			}
		}
		after := gridMI(t, s, p, skills)
		t.Logf("hidden %v: MI bound %.4f -> %.4f (log 4 = %.4f), accuracy %.3f -> %.3f",
			net.Hidden, before.Bound, after.Bound, math.Log(k), before.Accuracy, after.Accuracy)
		if after.Accuracy != 1 {
			t.Errorf("hidden %v: accuracy %g, want 1", net.Hidden, after.Accuracy)
		}
		if after.Bound < 0.97*math.Log(k) || after.Bound > math.Log(k) {
			t.Errorf("hidden %v: MI bound %g, want in [0.97 log 4, log 4]", net.Hidden, after.Bound)
		}
		if math.Abs(before.Bound) > 0.3 {
			t.Errorf("hidden %v: untrained bound %g, want near 0", net.Hidden, before.Bound)
		}
	}
}

func TestLearnGridVMF(t *testing.T) {
	// Four skills drawn from the uniform prior on S^7; after training,
	// phi(s) . z_k must separate them: every state reached by skill k has
	// phi(s) . z_k above phi(s) . z_j for j != k by a margin, and the mean
	// reward of the own skill is close to 1.
	const k, d, n = 4, 8, 64
	ns := gridSide * gridSide
	p := UniformSphere{D: d}
	for _, tc := range []struct {
		net   NetConfig
		learn bool
	}{
		{NetConfig{}, false},
		{NetConfig{}, true},
		{NetConfig{Hidden: []int{16}, Tanh: true}, false},
	} {
		rng := rand.New(rand.NewPCG(8, 1))
		skills := make([][]float64, k)
		for i := range skills {
			skills[i] = make([]float64, d)
			p.Sample(skills[i], rng)
		}
		v, err := NewVMF(&VMFConfig{In: ns, Dim: d, Net: tc.net, Kappa: 5, LearnKappa: tc.learn, Optim: OptimConfig{StepSize: 0.05}}, rng)
		if err != nil {
			t.Fatal(err)
		}
		before := gridMI(t, v, p, skills)
		x, z := make([]float64, n*ns), make([]float64, n*d)
		for range 200 {
			gridBatch(rng, x, z, n, skills)
			if _, err := v.Update(x, z); err != nil {
				t.Fatal(err)
			}
		}
		after := gridMI(t, v, p, skills)
		obs := make([]float64, ns)
		var own float64
		worst := math.Inf(1)
		for kk := range k {
			for _, s := range gridRollout(kk) {
				OneHot(obs, s)
				r := v.Reward(obs, skills[kk])
				own += r / (4 * k)
				for j := range k {
					if j != kk {
						worst = min(worst, r-v.Reward(obs, skills[j]))
					}
				}
			}
		}
		t.Logf("hidden %v learn kappa %v: mean own reward %.4f, worst margin %.4f, kappa %.3g, MI bound %.3f -> %.3f",
			tc.net.Hidden, tc.learn, own, worst, v.Kappa(), before.Bound, after.Bound)
		// phi(s) = z_k exactly would give the margin 1 - max_{j != k} z_k . z_j.
		ideal := math.Inf(1)
		for a := range k {
			for b := range a {
				ideal = min(ideal, 1-vec.DotSeq(skills[a], skills[b]))
			}
		}
		if own < 0.95 || worst < 0.9*ideal {
			t.Errorf("hidden %v: own reward %.4f (want >= 0.95), margin %.4f (want >= 0.9 x ideal %.4f)", tc.net.Hidden, own, worst, ideal)
		}
		if after.Bound <= before.Bound {
			t.Errorf("MI bound did not grow: %g -> %g", before.Bound, after.Bound)
		}
		// A_d(kappa) = mean phi.z at the optimum of kappa, and mean phi.z is
		// near 1 here, so a learned kappa climbs (to its cap of 1000).
		if tc.learn && !(v.Kappa() > 5) {
			t.Errorf("learned kappa %g did not grow from 5 though the skills separate", v.Kappa())
		}
	}
}
