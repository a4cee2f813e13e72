package mdp_test

import (
	"fmt"

	"github.com/successor-go/successor/mdp"
)

func ExampleOptimal() {
	// A three-state corridor: 0 - 1 - 2, state 2 terminal; reaching it
	// pays 1. Actions: 0 = left, 1 = right.
	tr := []mdp.ProbEntry{
		{State: 0, Action: 0, Next: 0, Prob: 1},
		{State: 0, Action: 1, Next: 1, Prob: 1},
		{State: 1, Action: 0, Next: 0, Prob: 1},
		{State: 1, Action: 1, Next: 2, Prob: 1},
	}
	m, err := mdp.New(3, 2, tr, []bool{false, false, true}, []float64{1, 0, 0})
	if err != nil {
		fmt.Println(err)
		return
	}
	res, err := mdp.Optimal(m, func(s, a, next int) float64 {
		if next == 2 {
			return 1
		}
		return 0
	}, 0.9)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("V* = %.2f\npolicy = %v\n", res.V, res.Policy)
	// Output:
	// V* = [0.90 1.00 0.00]
	// policy = [1 1 0]
}

func ExampleParseGrid() {
	// A 2x3 room: start at the left, a goal cell 'G' that ends the episode.
	layout := `
		S.G
		...
	`
	g, err := mdp.ParseGrid(layout, &mdp.GridConfig{
		Labels:   map[rune]string{'G': "goal"},
		Terminal: []string{"goal"},
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	w, _ := g.Weights(map[string]float64{"goal": 1})
	r, _ := g.PlaceReward(w) // +1 on arrival at the goal
	v, err := mdp.Evaluate(g.MDP, mdp.Uniform{N: g.MDP.NumActions()}, r, 0.9)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(g.LabelNames(), g.NumStates(), "states")
	fmt.Print(g.Format(v.V, "%5.3f"))
	// The values satisfy V = 0.25 sum_a (r + 0.9 V(next)) in every cell
	// (checked by hand to three decimals).

	// Output:
	// [goal] 6 states
	// 0.362 0.556 0.000
	// 0.328 0.441 0.635
}

func ExampleDepot() {
	g, err := mdp.Depot() // invented demo floor
	if err != nil {
		fmt.Println(err)
		return
	}
	// "Reach the dock but keep off the charging lane."
	w, _ := g.Weights(map[string]float64{"dock": 1, "lane": -1, "charger": -1})
	r, _ := g.PlaceReward(w)
	res, err := mdp.Optimal(g.MDP, r, 0.95)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(g.NumStates(), "cells,", g.MDP.NumActions(), "actions, labels", g.LabelNames())
	s := 0
	for i, p := range g.MDP.Start() {
		if p > 0 {
			s = i
		}
	}
	fmt.Printf("V*(start) = %.3f, residual below 1e-9: %v\n", res.V[s], res.Residual < 1e-9)
	// Derived by hand: the top-aisle route reaches the dock on move 16 and
	// stays there, so V*(start) = sum_{t>=15} 0.95^t = 0.95^15 / 0.05.

	// Output:
	// 105 cells, 5 actions, labels [bay1 bay2 bench charger dock lane]
	// V*(start) = 9.266, residual below 1e-9: true
}
