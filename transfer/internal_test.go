package transfer

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/internal/testtol"
	"github.com/successor-go/successor/internal/vec"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
)

const roomLayout = `
#######
#A...B#
#.....#
#..S..#
#######
`

func room(t testing.TB) (*mdp.Grid, *sf.Labels) {
	t.Helper()
	g, err := mdp.ParseGrid(roomLayout, &mdp.GridConfig{Labels: map[rune]string{'A': "apple", 'B': "berry"}, Stay: true})
	if err != nil {
		t.Fatal(err)
	}
	f, err := sf.GridLabels(g, true)
	if err != nil {
		t.Fatal(err)
	}
	return g, f
}

// TestInferExact: with the given place features plus a constant, a place
// reward is exactly linear in phi, so ridge regression with a tiny penalty
// recovers w, R^2 = 1 and a zero residual to the Solve tier (derived by
// hand: the normal equations are solved exactly up to the lambda = 1e-12
// bias; measured errors about 3e-14).
func TestInferExact(t *testing.T) {
	g, f := room(t)
	ag, err := newAgent(g.NumStates(), g.MDP.NumActions(), mustDefaults(t, &PretrainConfig{Method: Given, Features: f}))
	if err != nil {
		t.Fatal(err)
	}
	want := []float64{0.7, -0.4, 0.1} // apple, berry, constant
	rng := rand.New(rand.NewPCG(1, 2))
	var lab []Labelled
	phi := make([]float64, 3)
	for range 300 {
		s := rng.IntN(g.NumStates())
		ag.Phi(phi, s)
		lab = append(lab, Labelled{S: s, Next: s, Reward: vec.DotSeq(phi, want)})
	}
	inf, err := inferRidge(ag, lab, 1e-12)
	if err != nil {
		t.Fatal(err)
	}
	for i := range want {
		if math.Abs(inf.Raw[i]-want[i]) > testtol.Solve {
			t.Errorf("w[%d] = %v, want %v", i, inf.Raw[i], want[i])
		}
	}
	if math.Abs(inf.RSquared-1) > testtol.Solve || inf.Residual > testtol.Solve {
		t.Errorf("R^2 %v residual %v, want 1 and 0", inf.RSquared, inf.Residual)
	}
	if n := math.Sqrt(vec.DotSeq(inf.W, inf.W)); math.Abs(n-1) > testtol.Exact {
		t.Errorf("|W| = %v, want 1 (sphere method)", n)
	}
}

func mustDefaults(t testing.TB, cfg *PretrainConfig) PretrainConfig {
	t.Helper()
	c, err := cfg.Resolve()
	if err != nil {
		t.Fatal(err)
	}
	return c
}

// TestScoreEnds checks the normalisation: the optimal policy of mdp.Optimal
// scores 1 and the uniform random policy 0 (by construction of the score),
// to the Solve tier (the policy's exact solve against the reference's).
func TestScoreEnds(t *testing.T) {
	g, _ := room(t)
	w, _ := g.Weights(map[string]float64{"berry": 1})
	r, _ := g.PlaceReward(w)
	ref, err := NewReference(g.MDP, r, 0.9)
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		pi   mdp.Policy
		want float64
	}{{ref.Best, 1}, {mdp.Uniform{N: g.MDP.NumActions()}, 0}} {
		sc, err := ref.Score(tc.pi)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(sc.Normalised-tc.want) > testtol.Solve {
			t.Errorf("score %v, want %v", sc.Normalised, tc.want)
		}
	}
}

// TestMonteCarlo checks the Monte Carlo estimate against the exact value of
// the uniform random policy (mdp.Evaluate) within 4 standard errors.
func TestMonteCarlo(t *testing.T) {
	g, _ := room(t)
	w, _ := g.Weights(map[string]float64{"berry": 1, "apple": -1})
	r, _ := g.PlaceReward(w)
	v, err := mdp.Evaluate(g.MDP, mdp.Uniform{N: g.MDP.NumActions()}, r, 0.8)
	if err != nil {
		t.Fatal(err)
	}
	exact := startValue(g.MDP, v.V)
	rng := rand.New(rand.NewPCG(9, 9))
	na := g.MDP.NumActions()
	mean, se, err := MonteCarlo(mdp.NewSampler(g.MDP, 0), func(int) int { return rng.IntN(na) }, r, 0.8, 4000, 80, rand.New(rand.NewPCG(5, 5)))
	if err != nil {
		t.Fatal(err)
	}
	// 0.8^80 < 2e-8 bounds the truncation bias.
	if math.Abs(mean-exact) > 4*se+1e-7 {
		t.Errorf("monte carlo %v +- %v, exact %v", mean, se, exact)
	}
}

// TestGivenSkillsExact: with given features the SF tables of the skills
// learn, by TD with relabelling, the SFs of their own greedy policies; the
// value of each skill's greedy policy for its own reward phi . z_k
// (mdp.Optimal as the reference) is close to optimal.
func TestGivenSkillsExact(t *testing.T) {
	g, f := room(t)
	explore, _ := mdp.WithStart(g.MDP, mdp.UniformStart(g.MDP))
	ag, err := Pretrain(mdp.NewSampler(explore, 0), &PretrainConfig{Method: Given, Features: f, Skills: 6, Steps: 20000, EpisodeSteps: 20, SkillGamma: 0.9, Seed: 4})
	if err != nil {
		t.Fatal(err)
	}
	for k := range ag.NumSkills() {
		z := ag.Skill(k)
		r := func(s, a, next int) float64 {
			phi := make([]float64, ag.d)
			ag.Phi(phi, next)
			return vec.DotSeq(phi, z)
		}
		pol := make(mdp.Deterministic, ag.n)
		for s := range pol {
			pol[s] = ag.actSkill(k, s, nil)
		}
		ref, err := NewReference(explore, r, 0.9)
		if err != nil {
			t.Fatal(err)
		}
		sc, err := ref.Score(pol)
		if err != nil {
			t.Fatal(err)
		}
		// Measured >= 0.99 for every skill; tolerance TD tier.
		if sc.Normalised < 0.95 {
			t.Errorf("skill %d: its greedy policy scores %.3f on its own reward, want >= 0.95", k, sc.Normalised)
		}
	}
}

// TestInferCV checks the closed-form leave-one-state-out error
// (sf.RidgeCV; Sherman-Morrison, Hastie, Tibshirani & Friedman, The
// Elements of Statistical Learning, 2nd ed., section 7.10) against
// refitting without each state, for a single-penalty grid, with the
// transitions grouped by their next state.
func TestInferCV(t *testing.T) {
	g, _ := room(t)
	ag, err := newAgent(g.NumStates(), g.MDP.NumActions(), mustDefaults(t, &PretrainConfig{Dim: 6, Skills: 4, Seed: 3}))
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(5, 6))
	var lab []Labelled
	for range 120 {
		s := rng.IntN(g.NumStates())
		lab = append(lab, Labelled{S: s, Next: s, Reward: rng.NormFloat64() + float64(s%3)})
	}
	const lam = 0.7
	inf, err := inferCV(ag, lab, []float64{lam})
	if err != nil {
		t.Fatal(err)
	}
	// Brute force: refit without each distinct next state.
	states := map[int]bool{}
	for _, l := range lab {
		states[l.Next] = true
	}
	var sum float64
	phi := make([]float64, ag.d)
	for s := range states {
		var rest []Labelled
		var ys []float64
		for _, l := range lab {
			if l.Next == s {
				ys = append(ys, l.Reward)
			} else {
				rest = append(rest, l)
			}
		}
		fit, err := inferRidge(ag, rest, lam)
		if err != nil {
			t.Fatal(err)
		}
		var mean float64
		for _, y := range ys {
			mean += y / float64(len(ys))
		}
		ag.Phi(phi, s)
		e := mean - vec.DotSeq(phi, fit.Raw)
		sum += e * e
	}
	want := sum / float64(len(states))
	if math.Abs(inf.CV-want) > testtol.Solve*(1+want) {
		t.Errorf("closed-form CV %v, brute force %v", inf.CV, want)
	}
	if inf.Lambda != lam {
		t.Errorf("lambda %v, want %v", inf.Lambda, lam)
	}
}
