package sf

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/internal/testtol"
	"github.com/successor-go/successor/linalg"
	"github.com/successor-go/successor/mdp"
)

// TestExactOneHotState checks the identity documented on Exact for
// phi(s,a,s') = e_s against linalg.Successor of the policy's state chain,
// the successor representation M = (I - gamma P)^-1 (Dayan 1993; Stachenfeld
// et al. 2017, Methods):
//
//	psi(s,a) = e_s + gamma sum_{s' non-terminal} P(s'|s,a) M[s'],
//	sum_a pi(a|s) psi(s,a) = M[s],
//
// where P has the rows of terminal states and the columns into terminal
// states zeroed (derived by hand: unroll the Bellman equation of Exact once).
func TestExactOneHotState(t *testing.T) {
	for seed := uint64(1); seed <= 6; seed++ {
		for _, gamma := range []float64{0, 0.5, 0.95} {
			m := randomMDP(t, seed, &mdp.RandomConfig{States: 9, Actions: 3, TerminalFraction: 0.25, SelfLoops: seed%2 == 0})
			pi := mdp.RandomPolicy(m, rand.New(rand.NewPCG(seed, 7)))
			n, na := m.NumStates(), m.NumActions()
			psi, err := Exact(m, pi, OneHotState{N: n}, gamma)
			if err != nil {
				t.Fatal(err)
			}
			p := m.Chain(pi).ToDense()
			for s := 0; s < n; s++ {
				if m.Terminal(s) {
					for i := 0; i < n; i++ {
						p.Set(i, s, 0)
					}
				}
			}
			var sr mat.Dense
			if err := linalg.Successor(&sr, p, gamma); err != nil {
				t.Fatal(err)
			}
			probs := make([]float64, na)
			for s := 0; s < n; s++ {
				if m.Terminal(s) {
					for _, v := range psi.State(s) {
						if v != 0 {
							t.Fatalf("seed %d: terminal state %d has psi %v, want 0", seed, s, psi.State(s))
						}
					}
					continue
				}
				avg := make([]float64, n)
				pi.Probs(probs, s)
				for a := 0; a < na; a++ {
					want := make([]float64, n)
					want[s] = 1
					next, prob := m.Next(s, a)
					for i, s2 := range next {
						if !m.Terminal(s2) {
							for j := range want {
								want[j] += gamma * prob[i] * sr.At(s2, j)
							}
						}
					}
					if d, sc := maxAbsDiff(psi.Row(s, a), want); d > testtol.Exact*(1+sc) {
						t.Errorf("seed %d gamma %v: psi(%d,%d) off by %g from e_s + gamma P M", seed, gamma, s, a, d)
					}
					axpy(avg, psi.Row(s, a), probs[a])
				}
				if d, sc := maxAbsDiff(avg, mat.Row(nil, s, &sr)); d > testtol.Exact*(1+sc) {
					t.Errorf("seed %d gamma %v: sum_a pi psi(%d,a) off by %g from M[%d]", seed, gamma, s, d, s)
				}
			}
		}
	}
}

// TestExactOneHotStateAction checks that with phi = e_{(s,a)} Exact is the
// successor representation of the state-action chain: rows of
// linalg.Successor(mdp's StateActionChain) for non-terminal states (by the
// closed form in DESIGN.md with PhiBar = I on those rows).
func TestExactOneHotStateAction(t *testing.T) {
	for seed := uint64(1); seed <= 4; seed++ {
		m := randomMDP(t, seed, &mdp.RandomConfig{States: 7, Actions: 2, TerminalFraction: 0.3})
		pi := mdp.RandomPolicy(m, rand.New(rand.NewPCG(seed, 8)))
		n, na := m.NumStates(), m.NumActions()
		const gamma = 0.9
		psi, err := Exact(m, pi, OneHotStateAction{N: n, A: na}, gamma)
		if err != nil {
			t.Fatal(err)
		}
		var sr mat.Dense
		if err := linalg.Successor(&sr, m.StateActionChain(pi).ToDense(), gamma); err != nil {
			t.Fatal(err)
		}
		for s := 0; s < n; s++ {
			for a := 0; a < na; a++ {
				want := make([]float64, n*na)
				if !m.Terminal(s) {
					mat.Row(want, s*na+a, &sr)
				}
				if d, sc := maxAbsDiff(psi.Row(s, a), want); d > testtol.Exact*(1+sc) {
					t.Errorf("seed %d: psi(%d,%d) off by %g from the state-action SR", seed, s, a, d)
				}
			}
		}
	}
}

// TestExactQ checks psi . w of Exact against mdp.Evaluate's Q^pi for the
// reward phi . w: two independent routes to the same number, on seeded
// random MDPs with random features, including the iterative branch (more
// than ExactDenseMax pairs).
func TestExactQ(t *testing.T) {
	for _, tc := range []struct {
		states, actions int
		term            float64
		gamma           float64
		tol             float64
	}{
		{5, 2, 0, 0.9, testtol.Exact},
		{12, 3, 0.2, 0.99, testtol.Exact},
		{30, 4, 0.1, 0.5, testtol.Exact},
		{20, 2, 0, 0, testtol.Exact},
		{2100, 2, 0.05, 0.9, testtol.Iter}, // 4200 pairs, not banded: iterative
		{2100, 2, 0.3, 1, testtol.Iter},    // iterative at gamma = 1
	} {
		t.Run(fmt.Sprintf("n=%d,A=%d,gamma=%v", tc.states, tc.actions, tc.gamma), func(t *testing.T) {
			for seed := uint64(1); seed <= 3; seed++ {
				rng := rand.New(rand.NewPCG(seed, 3))
				m := randomMDP(t, seed, &mdp.RandomConfig{States: tc.states, Actions: tc.actions, TerminalFraction: tc.term})
				pi := mdp.RandomPolicy(m, rng)
				phi, err := NewRandom(tc.states, 4, false, rng)
				if err != nil {
					t.Fatal(err)
				}
				w := []float64{1, -0.5, 2, 0.25}
				psi, err := Exact(m, pi, phi, tc.gamma)
				if err != nil {
					t.Fatal(err)
				}
				v, err := mdp.Evaluate(m, pi, rewardOf(phi, w), tc.gamma)
				if err != nil {
					t.Fatal(err)
				}
				q := make([]float64, tc.states*tc.actions)
				psi.QTable(q, w)
				if d, sc := maxAbsDiff(q, v.Q); d > tc.tol*(1+sc) {
					t.Errorf("seed %d: max |psi.w - Q^pi| = %g (scale %g)", seed, d, sc)
				}
			}
		})
	}
}

// TestExactRandomWalk checks Exact on Sutton & Barto, Reinforcement
// Learning 2nd ed., Example 6.2, undiscounted (gamma = 1): with the label
// feature "enter the right end" the state values under the random walk are
// 1/6, 2/6, ..., 5/6 for A..E (the book's true values); with one-hot state
// features, the expected visits sum_a pi psi(s, a)[j] are the fundamental
// matrix of the walk, N[i][j] = 2 min(i,j) (6 - max(i,j)) / 6 for the
// symmetric walk on 1..5 absorbed at 0 and 6 (gambler's ruin, derived by
// hand from the Green's function of the walk).
func TestExactRandomWalk(t *testing.T) {
	m := randomWalk(t)
	pi := mdp.Uniform{N: 2}
	right, err := NewLabels([]int{-1, -1, -1, -1, -1, -1, 0}, 1, false)
	if err != nil {
		t.Fatal(err)
	}
	psi, err := Exact(m, pi, right, 1)
	if err != nil {
		t.Fatal(err)
	}
	for s := 1; s <= 5; s++ {
		v := 0.5*psi.Row(s, 0)[0] + 0.5*psi.Row(s, 1)[0]
		if want := float64(s) / 6; math.Abs(v-want) > testtol.Exact {
			t.Errorf("V(%c) = %v, want %v", 'A'+s-1, v, want)
		}
	}
	sr, err := Exact(m, pi, OneHotState{N: 7}, 1)
	if err != nil {
		t.Fatal(err)
	}
	for i := 1; i <= 5; i++ {
		for j := 1; j <= 5; j++ {
			got := 0.5*sr.Row(i, 0)[j] + 0.5*sr.Row(i, 1)[j]
			want := 2 * float64(min(i, j)*(6-max(i, j))) / 6
			if math.Abs(got-want) > testtol.Exact {
				t.Errorf("N[%d][%d] = %v, want %v", i, j, got, want)
			}
		}
	}
}

// TestExactBellman checks the Bellman residual Psi - PhiBar - gamma P_pi Psi
// of Exact directly (an invariant, derived by hand from the definition).
func TestExactBellman(t *testing.T) {
	m := randomMDP(t, 11, &mdp.RandomConfig{States: 15, Actions: 3, TerminalFraction: 0.2})
	pi := mdp.RandomPolicy(m, rand.New(rand.NewPCG(5, 5)))
	phi, _ := NewRandom(15, 6, true, rand.New(rand.NewPCG(6, 6)))
	const gamma = 0.97
	psi, err := Exact(m, pi, phi, gamma)
	if err != nil {
		t.Fatal(err)
	}
	probs := make([]float64, 3)
	f := make([]float64, 6)
	for s := 0; s < 15; s++ {
		if m.Terminal(s) {
			continue
		}
		for a := 0; a < 3; a++ {
			want := make([]float64, 6)
			next, prob := m.Next(s, a)
			for i, s2 := range next {
				phi.Features(f, s, a, s2)
				axpy(want, f, prob[i])
				if m.Terminal(s2) {
					continue
				}
				pi.Probs(probs, s2)
				for a2, q := range probs {
					axpy(want, psi.Row(s2, a2), gamma*prob[i]*q)
				}
			}
			if d, sc := maxAbsDiff(psi.Row(s, a), want); d > testtol.Exact*(1+sc) {
				t.Errorf("Bellman residual at (%d,%d) = %g", s, a, d)
			}
		}
	}
}

func TestExactErrors(t *testing.T) {
	m := randomWalk(t)
	phi := OneHotState{N: 7}
	for _, tc := range []struct {
		name  string
		pi    mdp.Policy
		gamma float64
		want  error
	}{
		{"gamma > 1", mdp.Uniform{N: 2}, 1.5, ErrDiscount},
		{"gamma NaN", mdp.Uniform{N: 2}, math.NaN(), ErrDiscount},
		{"never terminates at gamma 1", mdp.Deterministic{0, 1, 0, 1, 0, 1, 0}, 1, ErrDiscount},
		{"not a distribution", badPolicy{}, 0.9, linalg.ErrNotStochastic},
	} {
		if _, err := Exact(m, tc.pi, phi, tc.gamma); !errors.Is(err, tc.want) {
			t.Errorf("%s: err = %v, want %v", tc.name, err, tc.want)
		}
	}
	// A policy that oscillates between B and C is fine below gamma = 1.
	if _, err := Exact(m, mdp.Deterministic{0, 1, 0, 1, 0, 1, 0}, phi, 0.9); err != nil {
		t.Errorf("gamma 0.9 oscillating policy: %v", err)
	}
}

type badPolicy struct{}

func (badPolicy) Probs(dst []float64, s int) {
	dst[0], dst[1] = 0.7, 0.7
}

// TestExactLongWalk checks the iterative branch (more than ExactDenseMax
// pairs) at gamma = 1 on a long symmetric random walk of n interior states
// absorbed at both ends: the probability of ending on the right from state
// i is i/(n+1) (gambler's ruin, derived by hand: V is linear between the
// ends).
func TestExactLongWalk(t *testing.T) {
	const n = 2100 // 2 actions: 4200 pairs
	var tr []mdp.ProbEntry
	for s := 1; s <= n; s++ {
		tr = append(tr,
			mdp.ProbEntry{State: s, Action: 0, Next: s - 1, Prob: 1},
			mdp.ProbEntry{State: s, Action: 1, Next: s + 1, Prob: 1})
	}
	term := make([]bool, n+2)
	term[0], term[n+1] = true, true
	start := make([]float64, n+2)
	start[1] = 1
	m, err := mdp.New(n+2, 2, tr, term, start)
	if err != nil {
		t.Fatal(err)
	}
	labels := make([]int, n+2)
	for i := range labels {
		labels[i] = -1
	}
	labels[n+1] = 0
	right, _ := NewLabels(labels, 1, false)
	psi, err := Exact(m, mdp.Uniform{N: 2}, right, 1)
	if err != nil {
		t.Fatal(err)
	}
	var worst float64
	for s := 1; s <= n; s++ {
		v := 0.5 * (psi.Row(s, 0)[0] + psi.Row(s, 1)[0])
		worst = max(worst, math.Abs(v-float64(s)/(n+1)))
	}
	if worst > testtol.Iter {
		t.Errorf("max |V - i/(n+1)| = %g", worst)
	}
}
