package sf

import (
	"math"
	"testing"

	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/mdp/mdptest"
)

// TestExactFixtures runs Exact on every textbook case of mdptest with the
// one-dimensional feature phi(s, a, s') = r(s, a, s'), so that psi(s, a)
// is Q^pi(s, a) and sum_a pi(a|s) psi(s, a) is V^pi(s), and compares V
// with the book's values carried by each case (Sutton & Barto 2nd ed.,
// Example 6.2, Figures 3.2 and 4.1; sources and tolerances in mdptest).
// Where the case has the book's V*, psi of mdp.Optimal's greedy policy
// must give it too: max_a psi(s, a) = V*(s).
func TestExactFixtures(t *testing.T) {
	for _, c := range mdptest.All() {
		t.Run(c.Name, func(t *testing.T) {
			m := c.MDP
			n, na := m.NumStates(), m.NumActions()
			if len(c.V) != n {
				t.Fatalf("case has %d reference values for %d states", len(c.V), n)
			}
			phi := FeatureFunc{D: 1, F: func(dst []float64, s, a, next int) {
				dst[0] = c.Reward(s, a, next)
			}}
			psi, err := Exact(m, c.Policy, phi, c.Gamma)
			if err != nil {
				t.Fatal(err)
			}
			probs := make([]float64, na)
			for s := 0; s < n; s++ {
				var v float64
				if !m.Terminal(s) {
					c.Policy.Probs(probs, s)
					for a := 0; a < na; a++ {
						v += probs[a] * psi.Row(s, a)[0]
					}
				}
				if d := math.Abs(v - c.V[s]); d > c.Tol {
					t.Errorf("V(%d) from psi = %.6f, book %.6f (%s)", s, v, c.V[s], c.Source)
				}
			}
			if c.OptimalV == nil {
				return
			}
			opt, err := mdp.Optimal(m, c.Reward, c.Gamma)
			if err != nil {
				t.Fatal(err)
			}
			star, err := Exact(m, opt.Policy, phi, c.Gamma)
			if err != nil {
				t.Fatal(err)
			}
			for s := 0; s < n; s++ {
				var v float64
				if !m.Terminal(s) {
					v = math.Inf(-1)
					for a := 0; a < na; a++ {
						v = max(v, star.Row(s, a)[0])
					}
				}
				if d := math.Abs(v - c.OptimalV[s]); d > c.OptimalTol {
					t.Errorf("V*(%d) from psi = %.6f, book %.6f (%s)", s, v, c.OptimalV[s], c.Source)
				}
			}
		})
	}
}
