package usf_test

import (
	"fmt"
	"math/rand/v2"

	"github.com/successor-go/successor/sf"
	"github.com/successor-go/successor/usf"
)

// A two-state world: action 0 moves to the other state, action 1 stays,
// and phi(s, a, s') = e_{s'}. Two skills, z_0 = (1, 0) and z_1 = (0, 1).
// Only z_0 acts, always staying in state 0; relabelling (one extra skill
// per transition, drawn from the set) updates z_1 on the same transition,
// toward z_1's own policy. With step 1 and gamma 0.5 (derived by hand):
//
//   - z_0 is greedy to stay (Q(0, stay) = psi . z_0 grows), so
//     psi(0, stay) = e_0 + 0.5 psi(0, stay) reaches e_0 / (1 - 0.5) = (2, 0);
//   - for z_1 both actions in state 0 are worth 0 (ties go to the lowest
//     action, move), and psi(0, move) is never updated, so
//     psi(0, stay) = e_0 + 0.5 psi(0, move) = (1, 0).
//
// The cached action values are psi . z: 2 for z_0 and 0 for z_1.
func ExampleTabular_UpdateRelabel() {
	zs := [][]float64{{1, 0}, {0, 1}}
	tab, err := usf.NewTabular(2, 2, zs, 0.5, &usf.TabularConfig{Schedule: sf.StepSchedule{StepSize: 1}})
	if err != nil {
		fmt.Println(err)
		return
	}
	b := usf.NewBatch(1, 0, 2)
	b.K = []int{0}                      // z_0 acted
	b.S[0], b.A[0], b.Next[0] = 0, 1, 0 // stay in state 0
	copy(b.Phi, []float64{1, 0})        // phi = e_0
	rng := rand.New(rand.NewPCG(1, 2))
	var st usf.TDStats
	for range 60 {
		if err := tab.UpdateRelabel(b, 1, &st, rng); err != nil {
			fmt.Println(err)
			return
		}
	}
	for k := range zs {
		fmt.Printf("z_%d: psi(0, stay) = %.3f, Q(0, stay) = %.3f\n", k, tab.Tables[k].Row(0, 1), tab.Values(k, 0)[1])
	}
	fmt.Printf("%d updates\n", st.N)
	// Output:
	// z_0: psi(0, stay) = [2.000 0.000], Q(0, stay) = 2.000
	// z_1: psi(0, stay) = [1.000 0.000], Q(0, stay) = 0.000
	// 120 updates
}
