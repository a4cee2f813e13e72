// Package mdptest provides textbook Markov decision processes with their
// published answers, so that any estimator (a TD learner, a successor
// feature table, a new solver) can be run against the same fixtures. Each
// Case names its source beside its reference values.
package mdptest

import (
	"fmt"

	"github.com/successor-go/successor/mdp"
)

// Case is a textbook MDP with a policy and its reference values.
type Case struct {
	Name   string      // short name
	Source string      // book and example number
	MDP    *mdp.Finite // the dynamics
	Reward mdp.Reward  // r(s, a, s')
	Gamma  float64     // discount of the reference values
	Policy mdp.Policy  // the policy whose values V gives
	V      []float64   // reference V^Policy, one per state
	Tol    float64     // tolerance of V (half the book's last printed digit, or 1e-9 for exact values)

	// OptimalV is the reference optimal value V*, or nil if the source
	// gives none; OptimalTol is its tolerance.
	OptimalV   []float64
	OptimalTol float64
}

// All returns every case, built afresh.
func All() []Case {
	return []Case{RandomWalk(), GridWorld(), CornerGrid()}
}

// RandomWalk is Sutton & Barto, Reinforcement Learning: An Introduction,
// 2nd ed., Example 6.2: states 0 (left exit, terminal), 1..5 = A..E, 6
// (right exit, terminal); two actions (0 left, 1 right) under the uniform
// policy; episodes start in C; +1 on the step into the right exit; gamma
// = 1. True values 1/6 .. 5/6.
func RandomWalk() Case {
	var tr []mdp.ProbEntry
	for s := 1; s <= 5; s++ {
		tr = append(tr,
			mdp.ProbEntry{State: s, Action: 0, Next: s - 1, Prob: 1},
			mdp.ProbEntry{State: s, Action: 1, Next: s + 1, Prob: 1})
	}
	m := must(mdp.New(7, 2, tr, []bool{true, false, false, false, false, false, true}, []float64{0, 0, 0, 1, 0, 0, 0}))
	return Case{
		Name:   "random walk",
		Source: "Sutton & Barto, Reinforcement Learning: An Introduction, 2nd ed., Example 6.2",
		MDP:    m,
		Reward: func(s, a, next int) float64 {
			if next == 6 {
				return 1
			}
			return 0
		},
		Gamma:  1,
		Policy: mdp.Uniform{N: 2},
		V:      []float64{0, 1. / 6, 2. / 6, 3. / 6, 4. / 6, 5. / 6, 0},
		Tol:    1e-9,
		// Derived by hand: moving right always reaches the exit with +1.
		OptimalV:   []float64{0, 1, 1, 1, 1, 1, 0},
		OptimalTol: 1e-9,
	}
}

var moves = [4][2]int{{-1, 0}, {0, 1}, {1, 0}, {0, -1}} // north, east, south, west

// GridWorld is the 5x5 grid of Sutton & Barto 2nd ed., Example 3.5: state
// 5*row + col, actions north, east, south, west; from A = 1 every action
// goes to A' = 21 with +10, from B = 3 to B' = 13 with +5; moves off the
// grid stay put with -1; other moves pay 0; gamma = 0.9. V is Figure 3.2
// (equiprobable policy) and OptimalV Figure 3.5 (Example 3.8), both
// printed to one decimal (rows 2-4 of Figure 3.2 and all of Figure 3.5
// are quoted from memory of the book and agree with an exact solve).
func GridWorld() Case {
	var tr []mdp.ProbEntry
	for r := 0; r < 5; r++ {
		for c := 0; c < 5; c++ {
			s := r*5 + c
			for a, d := range moves {
				next := s
				switch {
				case s == 1:
					next = 21
				case s == 3:
					next = 13
				default:
					if nr, nc := r+d[0], c+d[1]; nr >= 0 && nr < 5 && nc >= 0 && nc < 5 {
						next = nr*5 + nc
					}
				}
				tr = append(tr, mdp.ProbEntry{State: s, Action: a, Next: next, Prob: 1})
			}
		}
	}
	start := make([]float64, 25)
	for i := range start {
		start[i] = 1.0 / 25
	}
	return Case{
		Name:   "5x5 grid world",
		Source: "Sutton & Barto, Reinforcement Learning: An Introduction, 2nd ed., Example 3.5 (Figure 3.2) and Example 3.8 (Figure 3.5)",
		MDP:    must(mdp.New(25, 4, tr, nil, start)),
		Reward: func(s, a, next int) float64 {
			switch {
			case s == 1:
				return 10
			case s == 3:
				return 5
			case s == next:
				return -1
			}
			return 0
		},
		Gamma:  0.9,
		Policy: mdp.Uniform{N: 4},
		V: []float64{
			3.3, 8.8, 4.4, 5.3, 1.5,
			1.5, 3.0, 2.3, 1.9, 0.5,
			0.1, 0.7, 0.7, 0.4, -0.4,
			-1.0, -0.4, -0.4, -0.6, -1.2,
			-1.9, -1.3, -1.2, -1.4, -2.0,
		},
		Tol: 0.05,
		OptimalV: []float64{
			22.0, 24.4, 22.0, 19.4, 17.5,
			19.8, 22.0, 19.8, 17.8, 16.0,
			17.8, 19.8, 17.8, 16.0, 14.4,
			16.0, 17.8, 16.0, 14.4, 13.0,
			14.4, 16.0, 14.4, 13.0, 11.7,
		},
		OptimalTol: 0.05,
	}
}

// CornerGrid is the 4x4 grid of Sutton & Barto 2nd ed., Example 4.1:
// state 4*row + col, terminal states 0 and 15, -1 on every transition,
// moves off the grid stay put, gamma = 1. V is Figure 4.1 (equiprobable
// policy, k = infinity); OptimalV is minus the distance to the nearer
// terminal corner (derived by hand).
func CornerGrid() Case {
	var tr []mdp.ProbEntry
	term := make([]bool, 16)
	term[0], term[15] = true, true
	for r := 0; r < 4; r++ {
		for c := 0; c < 4; c++ {
			s := r*4 + c
			if term[s] {
				continue
			}
			for a, d := range moves {
				next := s
				if nr, nc := r+d[0], c+d[1]; nr >= 0 && nr < 4 && nc >= 0 && nc < 4 {
					next = nr*4 + nc
				}
				tr = append(tr, mdp.ProbEntry{State: s, Action: a, Next: next, Prob: 1})
			}
		}
	}
	start := make([]float64, 16)
	for i := 1; i < 15; i++ {
		start[i] = 1.0 / 14
	}
	return Case{
		Name:   "4x4 grid world with terminal corners",
		Source: "Sutton & Barto, Reinforcement Learning: An Introduction, 2nd ed., Example 4.1 (Figure 4.1)",
		MDP:    must(mdp.New(16, 4, tr, term, start)),
		Reward: func(s, a, next int) float64 { return -1 },
		Gamma:  1,
		Policy: mdp.Uniform{N: 4},
		V: []float64{
			0, -14, -20, -22,
			-14, -18, -20, -20,
			-20, -20, -18, -14,
			-22, -20, -14, 0,
		},
		Tol: 1e-9,
		OptimalV: []float64{
			0, -1, -2, -3,
			-1, -2, -3, -2,
			-2, -3, -2, -1,
			-3, -2, -1, 0,
		},
		OptimalTol: 1e-9,
	}
}

func must(m *mdp.Finite, err error) *mdp.Finite {
	if err != nil {
		panic(fmt.Sprintf("mdptest: building a fixture: %v", err))
	}
	return m
}
