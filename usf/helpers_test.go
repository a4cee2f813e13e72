package usf

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/internal/vec"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
)

// problem is a finite MDP with features and a discount.
type problem struct {
	m     *mdp.Finite
	phi   sf.FeatureMap
	gamma float64
}

// randomProblem returns a seeded random MDP (mdp.RandomFinite) with random
// unit next-state features of dimension d (sf.NewRandom).
func randomProblem(t testing.TB, seed uint64, states, actions, d int, terminal float64) problem {
	t.Helper()
	return randomProblemBranching(t, seed, states, actions, d, 3, terminal)
}

// randomProblemBranching is randomProblem with the given number of
// successors per state-action pair (1: deterministic transitions).
func randomProblemBranching(t testing.TB, seed uint64, states, actions, d, branching int, terminal float64) problem {
	t.Helper()
	rng := rand.New(rand.NewPCG(seed, 1))
	m, err := mdp.RandomFinite(&mdp.RandomConfig{States: states, Actions: actions, Branching: branching, TerminalFraction: terminal}, rng)
	if err != nil {
		t.Fatal(err)
	}
	phi, err := sf.NewRandom(states, d, true, rng)
	if err != nil {
		t.Fatal(err)
	}
	return problem{m: m, phi: phi, gamma: 0.9}
}

// exactUSF returns the exact SFs of an optimal policy for the reward
// phi . z (sf.Exact of the policy from mdp.Optimal), and that policy.
// At the TD fixed point psi(., ., z) is these SFs (package doc).
func exactUSF(t testing.TB, p problem, z []float64) (*sf.Table, mdp.Deterministic) {
	t.Helper()
	buf := make([]float64, p.phi.Dim())
	r := func(s, a, next int) float64 {
		p.phi.Features(buf, s, a, next)
		return vec.Dot(buf, z)
	}
	opt, err := mdp.Optimal(p.m, r, p.gamma)
	if err != nil {
		t.Fatal(err)
	}
	tab, err := sf.Exact(p.m, opt.Policy, p.phi, p.gamma)
	if err != nil {
		t.Fatal(err)
	}
	return tab, opt.Policy
}

// sampler draws transitions (s, a) uniform over non-terminal states and
// actions, s' ~ P(.|s, a), z uniform from a list, into batches.
type sampler struct {
	p      problem
	states []int // non-terminal states
	zs     [][]float64
}

func newSampler(p problem, zs [][]float64) *sampler {
	sp := &sampler{p: p, zs: zs}
	for s := 0; s < p.m.NumStates(); s++ {
		if !p.m.Terminal(s) {
			sp.states = append(sp.states, s)
		}
	}
	return sp
}

// fill writes len(b.A) transitions into b (S, Next and, if b.X is set,
// one-hot X and NextX).
func (sp *sampler) fill(b *Batch, rng *rand.Rand) {
	d := sp.p.phi.Dim()
	n := sp.p.m.NumStates()
	for i := range b.A {
		s := sp.states[rng.IntN(len(sp.states))]
		a := rng.IntN(sp.p.m.NumActions())
		next, prob := sp.p.m.Next(s, a)
		s2 := next[mdp.SampleIndex(prob, rng)]
		b.S[i], b.A[i], b.Next[i] = s, a, s2
		b.Terminal[i] = sp.p.m.Terminal(s2)
		sp.p.phi.Features(b.Phi[i*d:(i+1)*d], s, a, s2)
		copy(b.Z[i*d:(i+1)*d], sp.zs[rng.IntN(len(sp.zs))])
		if b.X != nil {
			clear(b.X[i*n : (i+1)*n])
			clear(b.NextX[i*n : (i+1)*n])
			b.X[i*n+s] = 1
			b.NextX[i*n+s2] = 1
		}
	}
}

// unitVectors returns k random unit vectors in R^d.
func unitVectors(rng *rand.Rand, k, d int) [][]float64 {
	out := make([][]float64, k)
	for i := range out {
		z := make([]float64, d)
		var ss float64
		for j := range z {
			z[j] = rng.NormFloat64()
			ss += z[j] * z[j]
		}
		for j := range z {
			z[j] /= math.Sqrt(ss)
		}
		out[i] = z
	}
	return out
}

// psiError returns max over non-terminal s, all a of |psi(s,a,z) -
// ref(s,a)| divided by max |ref|, for an approximator read through
// PsiState.
func psiError(ap StatePsi, ref *sf.Table, m *mdp.Finite, z []float64) float64 {
	dst := make([]float64, ref.A*ref.D)
	var worst, scale float64
	for s := 0; s < ref.S; s++ {
		if m.Terminal(s) {
			continue
		}
		ap.PsiState(dst, s, z)
		for i, v := range ref.State(s) {
			worst = math.Max(worst, math.Abs(dst[i]-v))
			scale = math.Max(scale, math.Abs(v))
		}
	}
	return worst / scale
}

func panics(f func()) (p bool) {
	defer func() { p = recover() != nil }()
	f()
	return false
}

// actionGap returns min over non-terminal s of (best - second best) Q*(s, .)
// divided by max |Q*|, for the optimal SFs ref and task z.
func actionGap(ref *sf.Table, m *mdp.Finite, z []float64) float64 {
	gap, scale := math.Inf(1), 0.0
	for s := 0; s < ref.S; s++ {
		if m.Terminal(s) {
			continue
		}
		b1, b2 := math.Inf(-1), math.Inf(-1)
		for a := 0; a < ref.A; a++ {
			q := ref.Q(s, a, z)
			scale = math.Max(scale, math.Abs(q))
			if q > b1 {
				b1, b2 = q, b1
			} else if q > b2 {
				b2 = q
			}
		}
		gap = math.Min(gap, b1-b2)
	}
	return gap / scale
}

// wellSeparated draws unit vectors in R^d until it has k whose optimal
// policies have a relative action gap of at least minGap: the SFs of a
// greedy policy jump where two actions tie, so a learner is compared with
// them only away from ties. The rule, not a hand choice, picks the z.
func wellSeparated(t testing.TB, p problem, rng *rand.Rand, k, d int, minGap float64) [][]float64 {
	t.Helper()
	var out [][]float64
	for tries := 0; len(out) < k; tries++ {
		if tries > 1000 {
			t.Fatalf("no %d vectors with action gap %v", k, minGap)
		}
		z := unitVectors(rng, 1, d)[0]
		ref, _ := exactUSF(t, p, z)
		if actionGap(ref, p.m, z) >= minGap {
			out = append(out, z)
		}
	}
	return out
}

// checkGreedy reports every non-terminal state where the greedy action of
// psi(s, ., z) . z differs from the optimal policy opt.
func checkGreedy(t *testing.T, ap StatePsi, opt mdp.Deterministic, p problem, z []float64) {
	t.Helper()
	na := p.m.NumActions()
	dst := make([]float64, na*len(z))
	for s := range opt {
		if p.m.Terminal(s) {
			continue
		}
		ap.PsiState(dst, s, z)
		if g := greedy(dst, z, na); g != opt[s] {
			t.Errorf("state %d: greedy action %d, optimal %d", s, g, opt[s])
		}
	}
}

// randomUnit writes a vector uniform on the unit sphere into dst
// (normalised standard normal).
func randomUnit(dst []float64, rng *rand.Rand) {
	for {
		var ss float64
		for j := range dst {
			dst[j] = rng.NormFloat64()
			ss += dst[j] * dst[j]
		}
		if ss > 1e-300 {
			r := 1 / math.Sqrt(ss)
			for j := range dst {
				dst[j] *= r
			}
			return
		}
	}
}
