package gpi

import (
	"github.com/successor-go/successor/internal/vec"

	"fmt"
	"math"

	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
)

// DominanceSlack returns 2 eps / (1 - gamma), the slack of Theorem 1 of
// Barreto et al. (2017, "Successor Features for Transfer in Reinforcement
// Learning", NeurIPS): if |Q^{pi_i} - Q~_i| <= eps everywhere for every i and
// pi is greedy in max_i Q~_i, then
//
//	Q^pi(s, a) >= max_i Q^{pi_i}(s, a) - 2 eps / (1 - gamma)
//
// at every (s, a). It returns an error wrapping ErrDiscount unless
// 0 <= gamma < 1, and ErrNonFinite or ErrConfig for a NaN, infinite or
// negative eps.
func DominanceSlack(eps, gamma float64) (float64, error) {
	if err := checkBoundArgs(eps, gamma); err != nil {
		return 0, fmt.Errorf("gpi: dominance slack: %w", err)
	}
	return 2 * eps / (1 - gamma), nil
}

// GapBound returns the bound of Theorem 2 of Barreto et al. (2017) on the
// optimality gap of the GPI policy pi on task w_i, when the sources are
// (within eps of) the value functions on task w_i of policies optimal for
// the tasks w_j in tasks:
//
//	Q*_i(s, a) - Q^pi_i(s, a) <= 2/(1 - gamma) (phiMax min_j ||w_i - w_j|| + eps),
//
// where phiMax = max ||phi(s, a, s')|| (see PhiMax) and the norms are
// Euclidean. It returns an error wrapping ErrNoSources for empty tasks,
// ErrDimension if a task's length differs from len(wi), ErrDiscount unless
// 0 <= gamma < 1, and ErrNonFinite or ErrConfig for non-finite inputs or
// a negative eps or phiMax.
func GapBound(wi []float64, tasks [][]float64, phiMax, eps, gamma float64) (float64, error) {
	if err := checkBoundArgs(eps, gamma); err != nil {
		return 0, fmt.Errorf("gpi: gap bound: %w", err)
	}
	if math.IsNaN(phiMax) || math.IsInf(phiMax, 0) {
		return 0, fmt.Errorf("gpi: gap bound: phiMax is %v: %w", phiMax, ErrNonFinite)
	}
	if phiMax < 0 {
		return 0, fmt.Errorf("gpi: gap bound: phiMax %v is negative: %w", phiMax, ErrConfig)
	}
	if len(tasks) == 0 {
		return 0, fmt.Errorf("gpi: gap bound: no task vectors: %w", ErrNoSources)
	}
	if err := checkFinite(wi); err != nil {
		return 0, fmt.Errorf("gpi: gap bound: task vector: %w", err)
	}
	dist := math.Inf(1)
	for j, wj := range tasks {
		if len(wj) != len(wi) {
			return 0, fmt.Errorf("gpi: gap bound: task %d has length %d, want %d: %w", j, len(wj), len(wi), ErrDimension)
		}
		if err := checkFinite(wj); err != nil {
			return 0, fmt.Errorf("gpi: gap bound: task %d: %w", j, err)
		}
		var ss float64
		for k := range wi {
			d := wi[k] - wj[k]
			ss += d * d
		}
		dist = min(dist, math.Sqrt(ss))
	}
	return 2 / (1 - gamma) * (phiMax*dist + eps), nil
}

// PhiMax returns max ||phi(s, a, s')|| (Euclidean norm) over the transitions
// of m with positive probability out of non-terminal states: the phi_max of
// Theorem 2 of Barreto et al. (2017), under which |phi . w - phi . w'| <=
// phiMax ||w - w'|| for every reward the MDP can pay. It panics if phi
// panics on a state or action of m.
func PhiMax(m *mdp.Finite, phi sf.FeatureMap) float64 {
	f := make([]float64, phi.Dim())
	var best float64
	for s := 0; s < m.NumStates(); s++ {
		if m.Terminal(s) {
			continue
		}
		for a := 0; a < m.NumActions(); a++ {
			next, _ := m.Next(s, a)
			for _, t := range next {
				phi.Features(f, s, a, t)
				best = max(best, math.Sqrt(vec.Dot(f, f)))
			}
		}
	}
	return best
}

// CheckDominance checks Theorem 1 of Barreto et al. (2017) exactly: q is the
// exact Q of the GPI policy and sources[i] the exact Q of the i-th source
// policy, all indexed alike; it returns nil if
//
//	q[j] >= max_i sources[i][j] - 2 eps / (1 - gamma) - tol
//
// for every j, else a *DominanceError for the pair with the largest
// violation (State and Action are j / actions and j % actions). tol absorbs
// the round-off of the solves (1e-9 is ample for well-conditioned
// problems). Errors wrap ErrDimension for mismatched lengths or a bad
// actions count, and those of DominanceSlack.
func CheckDominance(q []float64, sources [][]float64, actions int, eps, gamma, tol float64) error {
	slack, err := DominanceSlack(eps, gamma)
	if err != nil {
		return fmt.Errorf("gpi: check dominance: %w", err)
	}
	if actions <= 0 || len(q)%actions != 0 {
		return fmt.Errorf("gpi: check dominance: %d values for %d actions: %w", len(q), actions, ErrDimension)
	}
	slack += tol
	var worst *DominanceError
	for i, qi := range sources {
		if len(qi) != len(q) {
			return fmt.Errorf("gpi: check dominance: source %d has %d values, want %d: %w", i, len(qi), len(q), ErrDimension)
		}
		for j, v := range qi {
			// Written so that a NaN on either side counts as a violation.
			if !(q[j] >= v-slack) && (worst == nil || v-q[j] > worst.Value-worst.GPI || math.IsNaN(v-q[j])) {
				worst = &DominanceError{State: j / actions, Action: j % actions, Source: i, GPI: q[j], Value: v, Slack: slack}
			}
		}
	}
	if worst != nil {
		return worst
	}
	return nil
}

// CheckGap checks an optimality-gap bound exactly: it returns nil if
// qStar[j] - q[j] <= bound + tol for every j, else a *GapError for the pair
// with the largest gap (State and Action are j / actions and j % actions).
// With bound from GapBound this is the check of Theorem 2 of Barreto et
// al. (2017). Errors wrap ErrDimension for mismatched lengths.
func CheckGap(qStar, q []float64, actions int, bound, tol float64) error {
	if len(qStar) != len(q) || actions <= 0 || len(q)%actions != 0 {
		return fmt.Errorf("gpi: check gap: %d and %d values for %d actions: %w", len(qStar), len(q), actions, ErrDimension)
	}
	var worst *GapError
	for j := range q {
		g := qStar[j] - q[j]
		if !(g <= bound+tol) && (worst == nil || g > worst.Gap || math.IsNaN(g)) {
			worst = &GapError{State: j / actions, Action: j % actions, Gap: g, Bound: bound + tol}
		}
	}
	if worst != nil {
		return worst
	}
	return nil
}

func checkBoundArgs(eps, gamma float64) error {
	if !(gamma >= 0 && gamma < 1) {
		return fmt.Errorf("gamma = %v, want 0 <= gamma < 1: %w", gamma, ErrDiscount)
	}
	if math.IsNaN(eps) || math.IsInf(eps, 0) {
		return fmt.Errorf("eps is %v: %w", eps, ErrNonFinite)
	}
	if eps < 0 {
		return fmt.Errorf("eps %v is negative: %w", eps, ErrConfig)
	}
	return nil
}
