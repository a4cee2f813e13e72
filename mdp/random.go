package mdp

import (
	"fmt"
	"math"
	"math/rand/v2"
)

// RandomConfig configures RandomFinite. A nil *RandomConfig and the zero
// value mean the documented defaults.
type RandomConfig struct {
	// States is the number of states. 0 means 10.
	States int
	// Actions is the number of actions. 0 means 2.
	Actions int
	// Branching is the number of distinct successor states of each
	// non-terminal (s, a), capped at States. 0 means 3.
	Branching int
	// TerminalFraction is the fraction of states made terminal, in [0, 1),
	// rounded down; at least one state stays non-terminal. 0 means none.
	TerminalFraction float64
	// SelfLoops allows s to be among its own successors. False excludes
	// it when States > 1 (so Branching is capped at States - 1).
	SelfLoops bool
}

// RandomFinite returns a seeded random MDP: each non-terminal (s, a) moves
// to Branching distinct states drawn uniformly, with probabilities drawn
// from the flat Dirichlet distribution (normalised exponentials); the
// terminal states are drawn uniformly; the start distribution is uniform
// over the non-terminal states. The same rng state gives the same MDP.
// The error wraps ErrConfig for a nil rng, or ErrDimension for negative
// sizes, more than MaxRows state-action pairs or transition entries
// (States x Actions x Branching, Branching capped as above), or a
// TerminalFraction outside [0, 1).
func RandomFinite(c *RandomConfig, rng *rand.Rand) (*Finite, error) {
	var cfg RandomConfig
	if c != nil {
		cfg = *c
	}
	n, na, b := cfg.States, cfg.Actions, cfg.Branching
	if n == 0 {
		n = 10
	}
	if na == 0 {
		na = 2
	}
	if b == 0 {
		b = 3
	}
	if rng == nil {
		return nil, fmt.Errorf("mdp: random: nil rng: %w", ErrConfig)
	}
	if n < 0 || na < 0 || b < 0 || !(cfg.TerminalFraction >= 0 && cfg.TerminalFraction < 1) {
		return nil, fmt.Errorf("mdp: random: bad config %+v: %w", cfg, ErrDimension)
	}
	if n > MaxRows/na {
		return nil, fmt.Errorf("mdp: random: %d states x %d actions too large: %w", n, na, ErrDimension)
	}
	pool := n
	if !cfg.SelfLoops && n > 1 {
		pool = n - 1
	}
	b = min(b, pool)
	if int64(n)*int64(na)*int64(b) > MaxRows { // n*na <= MaxRows and b <= n: no overflow
		return nil, fmt.Errorf("mdp: random: %d states x %d actions x %d successors exceed %d transition entries: %w", n, na, b, MaxRows, ErrDimension)
	}
	term := make([]bool, n)
	nt := min(int(math.Floor(cfg.TerminalFraction*float64(n))), n-1)
	perm := rng.Perm(n)
	for _, s := range perm[:nt] {
		term[s] = true
	}
	tr := make([]ProbEntry, 0, (n-nt)*na*b)
	idx := make([]int, n)
	w := make([]float64, b)
	for s := 0; s < n; s++ {
		if term[s] {
			continue
		}
		for a := 0; a < na; a++ {
			var sum float64
			if 2*b <= pool {
				// Rejection: draw until b distinct successors (expected
				// O(b^2) work, independent of n).
				for k := 0; k < b; {
					j := rng.IntN(n)
					if j == s && pool < n {
						continue
					}
					dup := false
					for _, x := range idx[:k] {
						dup = dup || x == j
					}
					if dup {
						continue
					}
					idx[k] = j
					k++
				}
			} else {
				// Partial Fisher-Yates over the candidate pool.
				for i := range idx {
					idx[i] = i
				}
				if pool < n { // exclude s by swapping it to the end
					idx[s], idx[n-1] = idx[n-1], idx[s]
				}
				for k := 0; k < b; k++ {
					j := k + rng.IntN(pool-k)
					idx[k], idx[j] = idx[j], idx[k]
				}
			}
			for k := 0; k < b; k++ {
				w[k] = rng.ExpFloat64()
				sum += w[k]
			}
			for k := 0; k < b; k++ {
				tr = append(tr, ProbEntry{State: s, Action: a, Next: idx[k], Prob: w[k] / sum})
			}
		}
	}
	start := make([]float64, n)
	for s := range start {
		if !term[s] {
			start[s] = 1 / float64(n-nt)
		}
	}
	m, err := New(n, na, tr, term, start)
	if err != nil {
		return nil, fmt.Errorf("mdp: random: %w", err)
	}
	return m, nil
}

// RandomReward returns a seeded expected-reward table rbar[s*A + a] with
// entries uniform in [-1, 1) for non-terminal states and 0 for terminal
// ones.
func RandomReward(m *Finite, rng *rand.Rand) []float64 {
	rbar := make([]float64, m.n*m.a)
	for i := range rbar {
		if !m.terminal[i/m.a] {
			rbar[i] = 2*rng.Float64() - 1
		}
	}
	return rbar
}

// RandomPolicy returns a seeded stochastic table policy with each state's
// action probabilities drawn from the flat Dirichlet distribution.
func RandomPolicy(m *Finite, rng *rand.Rand) *Table {
	p := make([]float64, m.n*m.a)
	for s := 0; s < m.n; s++ {
		row := p[s*m.a : (s+1)*m.a]
		var sum float64
		for a := range row {
			row[a] = rng.ExpFloat64()
			sum += row[a]
		}
		for a := range row {
			row[a] /= sum
		}
	}
	return &Table{a: m.a, p: p}
}
