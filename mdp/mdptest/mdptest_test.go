package mdptest_test

import (
	"math"
	"testing"

	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/mdp/mdptest"
)

// TestCases checks every fixture's reference values (sources in each
// Case) against the exact oracles.
func TestCases(t *testing.T) {
	for _, c := range mdptest.All() {
		t.Run(c.Name, func(t *testing.T) {
			n := c.MDP.NumStates()
			if len(c.V) != n || (c.OptimalV != nil && len(c.OptimalV) != n) {
				t.Fatalf("%d states but %d values and %d optimal values", n, len(c.V), len(c.OptimalV))
			}
			if c.Source == "" || !(c.Tol > 0) || (c.OptimalV != nil && !(c.OptimalTol > 0)) {
				t.Fatalf("case without a source or a tolerance: %q, %g, %g", c.Source, c.Tol, c.OptimalTol)
			}
			v, err := mdp.Evaluate(c.MDP, c.Policy, c.Reward, c.Gamma)
			if err != nil {
				t.Fatal(err)
			}
			for s := range c.V {
				if d := math.Abs(v.V[s] - c.V[s]); d > c.Tol {
					t.Errorf("V(%d) = %.6f, reference %.6f (%s)", s, v.V[s], c.V[s], c.Source)
				}
			}
			if c.OptimalV == nil {
				return
			}
			o, err := mdp.Optimal(c.MDP, c.Reward, c.Gamma)
			if err != nil {
				t.Fatal(err)
			}
			for s := range c.OptimalV {
				if d := math.Abs(o.V[s] - c.OptimalV[s]); d > c.OptimalTol {
					t.Errorf("V*(%d) = %.6f, reference %.6f (%s)", s, o.V[s], c.OptimalV[s], c.Source)
				}
			}
		})
	}
}
