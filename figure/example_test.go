package figure_test

import (
	"bytes"
	"cmp"
	"fmt"
	"log"
	"os"
	"path/filepath"
	"strings"

	"github.com/successor-go/successor/experiment"
	"github.com/successor-go/successor/figure"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
	"github.com/successor-go/successor/transfer"
)

// Example draws the figures and the table of a small experiment on an
// invented room of one's own, as the depot demo does for the depot. The
// experiment (first part) is the one of package experiment's example; the
// figures, the table and the NumPy arrays take the 15 lines after it.
func Example() {
	g, err := mdp.ParseGrid(`
		#######
		#A...B#
		#.....#
		#..S..#
		#######`, &mdp.GridConfig{Labels: map[rune]string{'A': "apple", 'B': "berry"}, Stay: true})
	if err != nil {
		log.Fatal(err)
	}
	places, _ := sf.GridLabels(g, false)
	explore, _ := mdp.WithStart(g.MDP, mdp.UniformStart(g.MDP))
	w, _ := g.Weights(map[string]float64{"berry": 1, "apple": -0.5})
	var agent *transfer.Agent // the pretrained agent of seed 1
	e := &experiment.Experiment{
		Task: g.MDP, Explore: explore, Places: places, PlaceNames: g.LabelNames(),
		Jobs:    []experiment.Job{{Name: "berry", Description: "go to the berry, away from the apple", Weights: w}},
		Methods: []transfer.PretrainConfig{{Method: transfer.Given, Skills: 8, Steps: 3000, EpisodeSteps: 20}},
		Seeds:   []uint64{1, 2}, Budgets: []int{50, 400}, Baselines: true,
		Adapt: transfer.AdaptConfig{EpisodeSteps: 50, SwitchEvery: 10}, Baseline: experiment.BaselineConfig{EpisodeSteps: 50},
		Keep: func(_ transfer.Method, seed uint64, ag *transfer.Agent) {
			if seed == 1 {
				agent = ag
			}
		},
	}
	res, err := e.Run()
	if err != nil {
		log.Fatal(err)
	}
	dir, _ := os.MkdirTemp("", "figures")
	defer os.RemoveAll(dir)

	// Figures, table and arrays.
	returns, err1 := figure.Returns(res, nil)
	succ, err2 := figure.Successor(g, []figure.Named{{Name: "uniform random", Policy: mdp.Uniform{N: g.MDP.NumActions()}}}, &figure.SuccessorOptions{Log: true})
	skills, _, err3 := figure.Skills(g, "given agent, run seed 1", figure.SkillPolicies(agent.USF()), &figure.SkillOptions{Count: 4})
	var table bytes.Buffer
	err4 := experiment.WriteTable(&table, res, nil)
	_, err5 := experiment.WriteArrays(filepath.Join(dir, "arrays"), []experiment.Array{experiment.RecordsArray(res), experiment.SummaryArray(res)})
	for _, f := range []struct {
		name string
		fig  *figure.Figure
	}{{"returns.png", returns}, {"successor.svg", succ}, {"skills.png", skills}} {
		if err := f.fig.Save(filepath.Join(dir, f.name)); err != nil {
			log.Fatal(err)
		}
	}
	if err := cmp.Or(err1, err2, err3, err4, err5); err != nil {
		log.Fatal(err)
	}

	files, _ := filepath.Glob(filepath.Join(dir, "*", "*"))
	more, _ := filepath.Glob(filepath.Join(dir, "*.*"))
	for _, f := range append(more, files...) {
		rel, _ := filepath.Rel(dir, f)
		fmt.Println(rel)
	}
	// The colour bar of the successor map: the exact expected discounted
	// visits of the start cell to itself is its largest value.
	fmt.Println(succ.Scales[0])
	fmt.Println(strings.SplitN(table.String(), "\n", 2)[0])
	// Output:
	// returns.png
	// skills.png
	// successor.svg
	// arrays/manifest.json
	// arrays/records.npy
	// arrays/summary.npy
	// expected discounted visits: 0.00315 .. 3.15 (log)
	// Normalised return after 400 labelled steps (0 = uniform random policy, 1 = optimal; mean +- standard error over 2 seeds; column "mean": the per-seed mean over jobs)
}
