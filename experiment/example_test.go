package experiment_test

import (
	"fmt"

	"github.com/successor-go/successor/experiment"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
	"github.com/successor-go/successor/transfer"
)

// Example runs a small experiment on an invented room: the given place
// features and von Mises-Fisher skills are each pretrained on two seeds,
// adapted to one job with 50 and 400 labelled steps, and scored exactly
// (0 = uniform random policy, 1 = optimal), beside Q-learning from scratch
// with the same budgets; the table is the mean over seeds at 400 steps. The printed figures are this seeded run's own values
// (not a reference): every run of this library version prints them.
func Example() {
	g, err := mdp.ParseGrid(`
		#######
		#A...B#
		#.....#
		#..S..#
		#######`, &mdp.GridConfig{Labels: map[rune]string{'A': "apple", 'B': "berry"}, Stay: true})
	if err != nil {
		fmt.Println(err)
		return
	}
	places, err := sf.GridLabels(g, false)
	if err != nil {
		fmt.Println(err)
		return
	}
	explore, err := mdp.WithStart(g.MDP, mdp.UniformStart(g.MDP))
	if err != nil {
		fmt.Println(err)
		return
	}
	w, _ := g.Weights(map[string]float64{"berry": 1, "apple": -0.5})
	e := &experiment.Experiment{
		Task: g.MDP, Explore: explore, Places: places, PlaceNames: g.LabelNames(),
		Jobs: []experiment.Job{{Name: "berry", Description: "go to the berry, away from the apple", Weights: w}},
		Methods: []transfer.PretrainConfig{
			{Method: transfer.Given, Skills: 8, Steps: 3000, EpisodeSteps: 20},
			{Method: transfer.VMF, Dim: 8, Skills: 16, Steps: 4000, EpisodeSteps: 20},
		},
		Seeds:     []uint64{1, 2},
		Budgets:   []int{50, 400},
		Baselines: true,
		Adapt:     transfer.AdaptConfig{EpisodeSteps: 50, SwitchEvery: 10},
		Baseline:  experiment.BaselineConfig{EpisodeSteps: 50},
	}
	res, err := e.Run()
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, v := range []string{"given" + experiment.SuffixGPI, "vmf" + experiment.SuffixGPI, "vmf" + experiment.SuffixNoGPI, experiment.VariantQLearning} {
		s, _ := res.Lookup(v, "mean", 400)
		fmt.Printf("%-15s %.2f +- %.2f\n", v, s.Mean, s.StdErr)
	}
	// Output:
	// given:usf+gpi   1.00 +- 0.00
	// vmf:usf+gpi     0.49 +- 0.51
	// vmf:usf-no-gpi  0.49 +- 0.51
	// q-learning      0.75 +- 0.25
}
