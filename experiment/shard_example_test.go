package experiment_test

import (
	"context"
	"fmt"
	"os"
	"reflect"

	"github.com/successor-go/successor/experiment"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
	"github.com/successor-go/successor/transfer"
)

// ExampleExperiment_RunShard runs a small experiment on an invented room
// as two shards, as two tasks of a job array would (each process builds
// the same experiment and runs its own shard into a shared folder), then
// merges the shards' records: the figures are those of a single run. The
// printed returns are this seeded run's own values, not references.
func ExampleExperiment_RunShard() {
	dir, err := os.MkdirTemp("", "shards")
	if err != nil {
		fmt.Println(err)
		return
	}
	defer os.RemoveAll(dir)
	build := func() *experiment.Experiment {
		g, _ := mdp.ParseGrid(`
			#######
			#A...B#
			#..S..#
			#######`, &mdp.GridConfig{Labels: map[rune]string{'A': "apple", 'B': "berry"}, Stay: true})
		places, _ := sf.GridLabels(g, false)
		w, _ := g.Weights(map[string]float64{"berry": 1})
		return &experiment.Experiment{
			Task: g.MDP, Places: places, PlaceNames: g.LabelNames(),
			Jobs: []experiment.Job{{Name: "berry", Weights: w}},
			Methods: []transfer.PretrainConfig{
				{Method: transfer.Given, Skills: 8, Steps: 1000, EpisodeSteps: 20},
			},
			Seeds:         []uint64{1, 2},
			Budgets:       []int{100},
			Baselines:     true,
			Adapt:         transfer.AdaptConfig{EpisodeSteps: 20},
			Baseline:      experiment.BaselineConfig{EpisodeSteps: 20},
			CheckpointDir: dir,
		}
	}
	for i := range 2 {
		rep, err := build().RunShard(context.Background(), experiment.Shard{Index: i, Count: 2})
		if err != nil {
			fmt.Println(err)
			return
		}
		fmt.Printf("shard %v ran %v\n", rep.Shard, rep.Units)
	}
	merged, err := build().Merge()
	if err != nil {
		fmt.Println(err)
		return
	}
	e := build()
	e.CheckpointDir = ""
	single, err := e.Run()
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, v := range []string{"given" + experiment.SuffixGPI, experiment.VariantQLearning} {
		m, _ := merged.Lookup(v, "mean", 100)
		s, _ := single.Lookup(v, "mean", 100)
		fmt.Printf("%-14s merged %.4f, single run %.4f\n", v, m.Mean, s.Mean)
	}
	fmt.Println("same rows:", reflect.DeepEqual(merged.Records, single.Records))
	// Output:
	// shard 0/2 ran [given seed 1 baselines seed 1]
	// shard 1/2 ran [given seed 2 baselines seed 2]
	// given:usf+gpi  merged 1.0000, single run 1.0000
	// q-learning     merged 0.7329, single run 0.7329
	// same rows: true
}
