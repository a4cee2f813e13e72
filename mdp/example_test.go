package mdp_test

import (
	"fmt"

	"github.com/successor-go/successor/mdp"
)

func ExampleOptimal() {
	// A three-state corridor: 0 - 1 - 2, state 2 terminal; reaching it
	// pays 1. Actions: 0 = left, 1 = right.
	tr := []mdp.Transition{
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
