package sf

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/linalg"
	"github.com/successor-go/successor/mdp"
)

// ExactDenseMax is the largest number of state-action pairs n*A for which
// Exact uses the direct solver linalg.SolveSuccessor (banded or dense LU, one
// factorisation for all d feature columns). Above it Exact solves the
// feature columns with the iterative solver linalg.SolveIterativeMulti
// (Krylov, columns shared among goroutines), which needs only the sparse
// chain.
const ExactDenseMax = 4096

// ExactBandMaxCost is the largest banded-LU cost n (kl + 1) (2 kl + ku + 1)
// (n pairs, lower and upper bandwidths kl and ku of the state-action chain)
// for which Exact solves directly above ExactDenseMax pairs: long chains and
// narrow grids in reading order are banded, and a direct solve is exact
// where the iterative one only meets a tolerance.
const ExactBandMaxCost = 2e8

// ExactIterTol is the relative residual to which Exact solves each feature
// column iteratively above ExactDenseMax pairs.
const ExactIterTol = 1e-11

// policyTol is the tolerance on the row sums of a policy's probabilities.
const policyTol = 1e-9

// Exact returns the exact successor features of policy pi on the finite MDP
// m for the features phi and discount gamma:
//
//	Psi = (I - gamma P_pi)^-1 PhiBar,
//	P_pi[(s,a),(s',a')] = P(s'|s,a) pi(a'|s')   (zero when s' is terminal),
//	PhiBar[(s,a)]       = sum_{s'} P(s'|s,a) phi(s,a,s'),
//
// over the n*A state-action pairs indexed s*A + a. Psi solves the Bellman
// equation psi(s,a) = E[phi(s,a,S') + gamma (1 - terminal(S')) psi(S',A')],
// A' ~ pi(.|S'), so psi(s,a) . w = Q^pi(s,a) for the reward
// r(s,a,s') = phi(s,a,s') . w.
//
// A terminal state has no transitions of its own: its rows of P_pi and
// PhiBar are zero, so psi(s, a) = 0 for a terminal s (its value is 0, as
// mdp.Evaluate has it).
//
// With the one-hot state features OneHotState, phi(s,a,s') = e_s, the
// identity is
//
//	psi(s,a) = e_s + gamma sum_{s' non-terminal} P(s'|s,a) M[s'],
//	sum_a pi(a|s) psi(s,a) = M[s]   (s non-terminal),
//
// where M = (I - gamma P)^-1 is the successor representation (Dayan 1993) of
// the state chain P[s][s'] = sum_a pi(a|s) P(s'|s,a) with the rows of
// terminal states and the columns into terminal states set to zero (a
// terminal state is never occupied at a decision step).
//
// gamma must be in [0, 1]; gamma = 1 is allowed when every state-action
// pair reaches a terminal state under pi (otherwise the error wraps
// ErrDiscount, as mdp.Evaluate's does). The policy is not queried at
// terminal states.
//
// Up to ExactDenseMax pairs, and above it for a chain whose banded
// factorisation costs at most ExactBandMaxCost, the solve is direct (one LU
// for all d columns): O((nA)^3) dense, or O(nA b^2) for a chain of
// bandwidth b. Otherwise the d columns are solved iteratively (Krylov, to
// relative residual ExactIterTol; the error wraps linalg.ErrNotConverged
// if a column fails).
//
// Errors wrap ErrConfig (a nil m, pi or phi), ErrDiscount, ErrDimension
// (phi or pi of the wrong size: a feature map or policy that implements
// mdp.Checker, as those of this package and of package mdp do, is checked
// against m before it is called; a table of more than MaxValues values),
// linalg.ErrNotStochastic (pi(.|s) is not a distribution), ErrNonFinite, or
// the solver's error.
func Exact(m *mdp.Finite, pi mdp.Policy, phi FeatureMap, gamma float64) (*Table, error) {
	if m == nil || pi == nil || phi == nil {
		return nil, fmt.Errorf("sf: exact: nil mdp, policy or features: %w", ErrConfig)
	}
	if !(gamma >= 0 && gamma <= 1) {
		return nil, fmt.Errorf("sf: exact: gamma %v outside [0, 1]: %w", gamma, ErrDiscount)
	}
	n, na, d := m.NumStates(), m.NumActions(), phi.Dim()
	if err := checkSizes("exact", n, na, d); err != nil {
		return nil, err
	}
	if err := checkFeatures(phi, n, na); err != nil {
		return nil, fmt.Errorf("sf: exact: %w", err)
	}
	probs, err := m.PolicyTable(pi)
	if err != nil {
		return nil, fmt.Errorf("sf: exact: %w", err)
	}
	p, err := stateActionChain(m, probs)
	if err != nil {
		return nil, fmt.Errorf("sf: exact: %w", err)
	}
	bar, err := expectedFeatures(m, phi)
	if err != nil {
		return nil, fmt.Errorf("sf: exact: %w", err)
	}
	nsa := n * na
	t := &Table{S: n, A: na, D: d, Data: make([]float64, nsa*d)}

	// The solvers take gamma in [0, 1). For gamma = 1 solve the same system
	// I - g p' with p' = P/g and g = 1/2 (the solver does not require a
	// stochastic p).
	g := gamma
	if gamma == 1 {
		if pair := notAbsorbing(p); pair >= 0 {
			return nil, fmt.Errorf("sf: exact: gamma = 1 but state %d action %d never reaches a terminal state: %w", pair/na, pair%na, ErrDiscount)
		}
		g = 0.5
		for i := range p.Val {
			p.Val[i] *= 2
		}
	}
	if nsa <= ExactDenseMax || bandCost(p) <= ExactBandMaxCost {
		var x mat.Dense
		if err := linalg.SolveSuccessor(&x, p, g, mat.NewDense(nsa, d, bar)); err != nil {
			return nil, fmt.Errorf("sf: exact: %w", err)
		}
		raw := x.RawMatrix()
		for i := 0; i < nsa; i++ {
			copy(t.Data[i*d:(i+1)*d], raw.Data[i*raw.Stride:i*raw.Stride+d])
		}
	} else {
		x := mat.NewDense(nsa, d, t.Data)
		if _, err := linalg.SolveIterativeMulti(x, p, g, mat.NewDense(nsa, d, bar), &linalg.IterConfig{Tol: ExactIterTol}); err != nil {
			return nil, fmt.Errorf("sf: exact: %w", err)
		}
	}
	for i, v := range t.Data {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("sf: exact: entry %d: %w", i, ErrNonFinite)
		}
	}
	return t, nil
}

// stateActionChain returns P_pi over state-action pairs, with the rows of
// terminal states and the entries into terminal states zero.
func stateActionChain(m *mdp.Finite, probs []float64) (*linalg.CSR, error) {
	n, na := m.NumStates(), m.NumActions()
	var trip []linalg.Triplet
	for s := 0; s < n; s++ {
		if m.Terminal(s) {
			continue
		}
		for a := 0; a < na; a++ {
			next, prob := m.Next(s, a)
			for i, s2 := range next {
				if m.Terminal(s2) {
					continue
				}
				for a2 := 0; a2 < na; a2++ {
					if q := probs[s2*na+a2]; q != 0 {
						trip = append(trip, linalg.Triplet{Row: s*na + a, Col: s2*na + a2, Val: prob[i] * q})
					}
				}
			}
		}
	}
	return linalg.CSRFromTriplets(n*na, n*na, trip)
}

// expectedFeatures returns PhiBar (n*A rows of d, row-major), with the rows
// of terminal states zero.
func expectedFeatures(m *mdp.Finite, phi FeatureMap) ([]float64, error) {
	n, na, d := m.NumStates(), m.NumActions(), phi.Dim()
	bar := make([]float64, n*na*d)
	f := make([]float64, d)
	for s := 0; s < n; s++ {
		if m.Terminal(s) {
			continue
		}
		for a := 0; a < na; a++ {
			row := bar[(s*na+a)*d : (s*na+a+1)*d]
			next, prob := m.Next(s, a)
			for i, s2 := range next {
				phi.Features(f, s, a, s2)
				for k, v := range f {
					if math.IsNaN(v) || math.IsInf(v, 0) {
						return nil, fmt.Errorf("phi(%d, %d, %d): %w", s, a, s2, ErrNonFinite)
					}
					row[k] += prob[i] * v
				}
			}
		}
	}
	return bar, nil
}

// notAbsorbing returns a pair of the sub-stochastic chain p from which no
// mass ever leaves (no path to a row summing to less than one), or -1 if
// every pair leaks mass, i.e. reaches a terminal state.
func notAbsorbing(p *linalg.CSR) int {
	n, _ := p.Dims()
	leaks := make([]bool, n)
	for i := range leaks {
		_, val := p.Row(i)
		var sum float64
		for _, v := range val {
			sum += v
		}
		leaks[i] = sum < 1-1e-12
	}
	return linalg.CannotReach(p, leaks)
}

// bandCost returns n (kl + 1) (2 kl + ku + 1) for the lower and upper
// bandwidths kl and ku of the square CSR p, as a float64 (no overflow).
func bandCost(p *linalg.CSR) float64 {
	n, _ := p.Dims()
	var kl, ku int
	for i := 0; i < n; i++ {
		ind, _ := p.Row(i)
		if len(ind) == 0 {
			continue
		}
		kl = max(kl, i-ind[0])
		ku = max(ku, ind[len(ind)-1]-i)
	}
	return float64(n) * float64(kl+1) * float64(2*kl+ku+1)
}
