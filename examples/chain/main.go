// Command chain learns the successor features of the random walk of Sutton
// & Barto (Reinforcement Learning, 2nd ed., Example 6.2) by TD(0) and prints,
// for growing budgets of sampled transitions, the largest error against the
// closed form sf.Exact: a first sanity check of a learner, and a template for
// checking your own.
//
// The walk has five states A..E between two terminal ends; every episode
// starts in C and moves left or right with probability 1/2 (the uniform
// policy over the two actions). The features are one-hot in the current
// state, so psi(s, a) holds the expected number of visits to each state
// (undiscounted, gamma = 1), and the exact values are the walk's
// fundamental matrix.
//
// Usage:
//
//	go run ./examples/chain [-seed 1] [-budgets 1000,10000,100000,1000000]
//	                        [-target sampled|expected] [-power 0.7]
package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"slices"
	"strconv"
	"strings"

	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
)

func main() {
	if err := run(os.Args[1:], os.Stdout, os.Stderr); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return // usage printed
		}
		fmt.Fprintln(os.Stderr, "chain:", err)
		os.Exit(2)
	}
}

// config is the parsed command line.
type config struct {
	seed    uint64
	budgets []int
	target  sf.Target
	power   float64
}

func parse(args []string, stderr io.Writer) (*config, error) {
	fs := flag.NewFlagSet("chain", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: chain [flags]\n\nLearns the successor features of the Sutton & Barto Example 6.2 random walk by TD(0)\nand prints the largest error against the exact SFs for growing budgets.\n\nFlags:")
		fs.PrintDefaults()
	}
	seed := fs.Uint64("seed", 1, "seed of the transition stream")
	budgets := fs.String("budgets", "1000,10000,100000,1000000", "comma-separated increasing numbers of transitions at which to report")
	target := fs.String("target", "sampled", "TD target: sampled (next action taken) or expected (average over the policy)")
	power := fs.Float64("power", 0.7, "step size 1/(1+n)^power per state-action pair, power in (0, 1]")
	if err := fs.Parse(args); err != nil {
		return nil, err
	}
	if fs.NArg() > 0 {
		return nil, fmt.Errorf("unexpected argument %q", fs.Arg(0))
	}
	c := &config{seed: *seed, power: *power}
	switch *target {
	case "sampled":
		c.target = sf.Sampled
	case "expected":
		c.target = sf.Expected
	default:
		return nil, fmt.Errorf("-target %q: want sampled or expected", *target)
	}
	if !(c.power > 0 && c.power <= 1) {
		return nil, fmt.Errorf("-power %v: want a value in (0, 1]", c.power)
	}
	for _, f := range strings.Split(*budgets, ",") {
		n, err := strconv.Atoi(strings.TrimSpace(f))
		if err != nil || n <= 0 {
			return nil, fmt.Errorf("-budgets: %q is not a positive integer", f)
		}
		c.budgets = append(c.budgets, n)
	}
	if !slices.IsSorted(c.budgets) {
		return nil, fmt.Errorf("-budgets %s: want increasing numbers", *budgets)
	}
	if c.budgets[len(c.budgets)-1] > 1e9 {
		return nil, fmt.Errorf("-budgets: %d transitions is more than this demo allows (1e9)", c.budgets[len(c.budgets)-1])
	}
	return c, nil
}

// walk returns the random walk: states 0..6, 0 and 6 terminal, start 3.
func walk() (*mdp.Finite, error) {
	var tr []mdp.ProbEntry
	for s := 1; s <= 5; s++ {
		tr = append(tr,
			mdp.ProbEntry{State: s, Action: 0, Next: s - 1, Prob: 1},
			mdp.ProbEntry{State: s, Action: 1, Next: s + 1, Prob: 1})
	}
	return mdp.New(7, 2, tr,
		[]bool{true, false, false, false, false, false, true},
		[]float64{0, 0, 0, 1, 0, 0, 0})
}

func run(args []string, stdout, stderr io.Writer) error {
	c, err := parse(args, stderr)
	if err != nil {
		return err
	}
	m, err := walk()
	if err != nil {
		return err
	}
	phi := sf.OneHotState{N: 7}
	pi := mdp.Uniform{N: 2}
	exact, err := sf.Exact(m, pi, phi, 1)
	if err != nil {
		return err
	}
	t, err := sf.NewTable(7, 2, 7)
	if err != nil {
		return err
	}
	td, err := sf.NewTD(t, phi, 1, &sf.TDConfig{Target: c.target, Policy: pi, Schedule: sf.StepSchedule{Power: c.power}})
	if err != nil {
		return err
	}
	var largest float64
	for _, v := range exact.Data {
		largest = max(largest, math.Abs(v))
	}
	fmt.Fprintf(stdout, "random walk (Sutton & Barto Example 6.2), one-hot state features, gamma 1\n")
	fmt.Fprintf(stdout, "TD(0) %v target, step 1/(1+n)^%v, seed %d; largest exact entry %.3f\n\n", c.target, c.power, c.seed, largest)
	fmt.Fprintf(stdout, "%12s %10s %10s %10s\n", "transitions", "episodes", "max error", "relative")

	rng := rand.New(rand.NewPCG(c.seed, 0x5eed))
	env := mdp.NewSampler(m, 0)
	s := env.Reset(rng)
	a := rng.IntN(2)
	done, episodes := 0, 0
	for _, budget := range c.budgets {
		for ; done < budget; done++ {
			out := env.Step(a, rng)
			a2 := rng.IntN(2)
			if err := td.Update(s, a, out.Next, out.Terminal(), a2); err != nil {
				return err
			}
			if out.Done() {
				episodes++
				s, a = env.Reset(rng), rng.IntN(2)
				continue
			}
			s, a = out.Next, a2
		}
		var worst float64
		for st := 1; st <= 5; st++ {
			for i, v := range t.State(st) {
				worst = max(worst, math.Abs(v-exact.State(st)[i]))
			}
		}
		fmt.Fprintf(stdout, "%12d %10d %10.4f %10.4f\n", budget, episodes, worst, worst/largest)
	}
	return nil
}
