package sf_test

import (
	"fmt"
	"log"
	"math"
	"math/rand/v2"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
)

// walk returns the random walk of Sutton & Barto 2nd ed., Example 6.2:
// states 0..6, the two ends terminal, start in the middle; action 0 moves
// left and action 1 right.
func walk() *mdp.Finite {
	var tr []mdp.ProbEntry
	for s := 1; s <= 5; s++ {
		tr = append(tr,
			mdp.ProbEntry{State: s, Action: 0, Next: s - 1, Prob: 1},
			mdp.ProbEntry{State: s, Action: 1, Next: s + 1, Prob: 1})
	}
	m, err := mdp.New(7, 2, tr,
		[]bool{true, false, false, false, false, false, true},
		[]float64{0, 0, 0, 1, 0, 0, 0})
	if err != nil {
		log.Fatal(err)
	}
	return m
}

func ExampleTable() {
	// Two states, two actions, two features: "reach the dock", "pay a toll".
	t, err := sf.NewTable(2, 2, 2)
	if err != nil {
		log.Fatal(err)
	}
	copy(t.Row(0, 0), []float64{0.9, 0.0})
	copy(t.Row(0, 1), []float64{1.0, 1.0})
	copy(t.Row(1, 0), []float64{0.5, 0.0})
	copy(t.Row(1, 1), []float64{0.8, 0.2})

	for _, w := range [][]float64{{1, 0}, {1, -0.5}} {
		a, q := t.Greedy(0, w)
		qs := make([]float64, 4)
		t.QTable(qs, w)
		fmt.Printf("w=%v: greedy in state 0 is action %d (Q %.2f); Q table %.2f\n", w, a, q, qs)
	}
	// Output:
	// w=[1 0]: greedy in state 0 is action 1 (Q 1.00); Q table [0.90 1.00 0.50 0.80]
	// w=[1 -0.5]: greedy in state 0 is action 0 (Q 0.90); Q table [0.90 0.50 0.50 0.70]
}

func ExampleExact() {
	m := walk()
	// One feature: 1 on entering the right end. Under the uniform random
	// walk, psi averaged over the two actions is the probability of ending
	// on the right: 1/6, ..., 5/6 (Sutton & Barto, Example 6.2).
	right, err := sf.NewLabels([]int{-1, -1, -1, -1, -1, -1, 0}, 1, false)
	if err != nil {
		log.Fatal(err)
	}
	psi, err := sf.Exact(m, mdp.Uniform{N: 2}, right, 1)
	if err != nil {
		log.Fatal(err)
	}
	for s := 1; s <= 5; s++ {
		v := 0.5*psi.Row(s, 0)[0] + 0.5*psi.Row(s, 1)[0]
		fmt.Printf("%c: %.4f\n", 'A'+s-1, v)
	}
	// Output:
	// A: 0.1667
	// B: 0.3333
	// C: 0.5000
	// D: 0.6667
	// E: 0.8333
}

func ExampleTD() {
	m := walk()
	phi := sf.OneHotState{N: 7} // psi counts expected visits to each state
	pi := mdp.Uniform{N: 2}
	exact, err := sf.Exact(m, pi, phi, 1)
	if err != nil {
		log.Fatal(err)
	}
	t, _ := sf.NewTable(7, 2, 7)
	td, err := sf.NewTD(t, phi, 1, &sf.TDConfig{Target: sf.Expected, Policy: pi, Schedule: sf.StepSchedule{Power: 0.6}})
	if err != nil {
		log.Fatal(err)
	}
	env := mdp.NewSampler(m, 0)
	rng := rand.New(rand.NewPCG(1, 2))
	for episode := 0; episode < 2000; episode++ {
		s := env.Reset(rng)
		for !env.Done() {
			a := rng.IntN(2)
			out := env.Step(a, rng)
			if err := td.Update(s, a, out.Next, out.Terminal(), 0); err != nil {
				log.Fatal(err)
			}
			s = out.Next
		}
	}
	var worst float64
	for s := 1; s <= 5; s++ {
		for i, v := range t.State(s) {
			worst = max(worst, abs(v-exact.State(s)[i]))
		}
	}
	fmt.Printf("expected visits to C from C, moving right first: TD %.3f, exact %.3f\n", t.Row(3, 1)[3], exact.Row(3, 1)[3])
	fmt.Printf("max error below 0.01: %v\n", worst < 0.01)
	// The exact 3 is derived by hand: the t = 0 visit plus the expected
	// visits to C from D, 2 x 3 x 2 / 6 = 2 (Green's function
	// 2 min(i,j) (6 - max(i,j)) / 6 of the symmetric walk absorbed at 0 and
	// 6, gambler's ruin, from memory). The TD figure 2.997 is our own seeded
	// run (a regression value), checked against the exact table above.

	// Output:
	// expected visits to C from C, moving right first: TD 2.997, exact 3.000
	// max error below 0.01: true
}

func abs(x float64) float64 {
	if x < 0 {
		return -x
	}
	return x
}

// corner is a user's own feature map: one feature that is 1 on entering
// either end of the walk, and one that costs 1 per step.
type corner struct{}

func (corner) Dim() int { return 2 }

func (corner) Features(dst []float64, s, a, next int) {
	if len(dst) != 2 {
		panic("corner: wrong length")
	}
	dst[0], dst[1] = 0, 1
	if next == 0 || next == 6 {
		dst[0] = 1
	}
}

func Example_customFeatureMap() {
	m := walk()
	pi := mdp.Uniform{N: 2}
	// Exact and TD accept any FeatureMap.
	psi, err := sf.Exact(m, pi, corner{}, 1)
	if err != nil {
		log.Fatal(err)
	}
	// From C: the walk surely ends (feature 0 sums to 1) and takes 9 steps
	// on average (feature 1; the gambler's-ruin duration 3 * 3).
	c := psi.State(3)
	fmt.Printf("end %.3f, steps %.3f\n", 0.5*(c[0]+c[2]), 0.5*(c[1]+c[3]))
	// Task "end quickly": +10 for ending, -1 per step.
	fmt.Printf("value of C: %.3f\n", 0.5*(psi.Q(3, 0, []float64{10, -1})+psi.Q(3, 1, []float64{10, -1})))

	t, _ := sf.NewTable(7, 2, 2)
	td, err := sf.NewTD(t, corner{}, 1, &sf.TDConfig{Schedule: sf.StepSchedule{StepSize: 1}})
	if err != nil {
		log.Fatal(err)
	}
	// With step 1, a move into a terminal state sets psi to phi (derived by
	// hand: the target has no bootstrap term): E moving right ends the walk
	// and takes one step.
	if err := td.Update(5, 1, 6, true, 0); err != nil {
		log.Fatal(err)
	}
	fmt.Println("TD accepts it too: psi(E, right) =", t.Row(5, 1))
	// Output:
	// end 1.000, steps 9.000
	// value of C: 1.000
	// TD accepts it too: psi(E, right) = [1 1]
}

func ExampleInferTask() {
	// The invented demo depot: place features of the cell entered, plus a
	// constant per-step dimension.
	g, err := mdp.Depot()
	if err != nil {
		log.Fatal(err)
	}
	phi, err := sf.GridLabels(g, true)
	if err != nil {
		log.Fatal(err)
	}
	names := append(g.LabelNames(), "step")
	// A hidden job: the packing bench pays 1, the charging lane costs 0.5,
	// every step costs 0.01. Rewards are observed on 400 random moves.
	hidden := make([]float64, phi.Dim())
	hidden[2], hidden[5], hidden[6] = 1, -0.5, -0.01
	rng := rand.New(rand.NewPCG(3, 4))
	m := g.MDP
	const n = 400
	phis := make([]float64, 0, n*phi.Dim())
	rewards := make([]float64, 0, n)
	f := make([]float64, phi.Dim())
	for len(rewards) < n {
		s, a := rng.IntN(m.NumStates()), rng.IntN(m.NumActions())
		next, _ := m.Next(s, a)
		phi.Features(f, s, a, next[0])
		r := 0.0
		for k := range f {
			r += f[k] * hidden[k]
		}
		phis = append(phis, f...)
		rewards = append(rewards, r)
	}
	w := make([]float64, phi.Dim())
	fit, err := sf.InferTask(w, mat.NewDense(n, phi.Dim(), phis), rewards, 0, nil)
	if err != nil {
		log.Fatal(err)
	}
	for k, name := range names {
		fmt.Printf("%-8s %6.3f\n", name, math.Round(w[k]*1000)/1000+0) // +0: no "-0.000"
	}
	fmt.Printf("rms residual below 1e-9: %v\n", fit.RMS < 1e-9)
	// Output:
	// bay1      0.000
	// bay2      0.000
	// bench     1.000
	// charger   0.000
	// dock      0.000
	// lane     -0.500
	// step     -0.010
	// rms residual below 1e-9: true
}
