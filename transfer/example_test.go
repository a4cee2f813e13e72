package transfer_test

import (
	"fmt"
	"math/rand/v2"

	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/transfer"
)

// Example pretrains von Mises-Fisher skills on a small invented room with no
// reward, infers a new task from 200 labelled steps, acts by GPI and scores
// the policy exactly (0 = uniform random policy, 1 = optimal).
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
	// Reward-free pretraining, dropped anywhere in the room.
	explore, _ := mdp.WithStart(g.MDP, mdp.UniformStart(g.MDP))
	agent, err := transfer.Pretrain(mdp.NewSampler(explore, 0), &transfer.PretrainConfig{
		Dim: 8, Skills: 16, Steps: 4000, EpisodeSteps: 20, SkillGamma: 0.95, Seed: 1,
	})
	if err != nil {
		fmt.Println(err)
		return
	}

	// A new job: go to the berry, away from the apple.
	w, _ := g.Weights(map[string]float64{"berry": 1, "apple": -0.5})
	reward, _ := g.PlaceReward(w)
	env := mdp.NewSampler(g.MDP, 0)
	// The ridge penalty of task inference is chosen by leave-one-state-out
	// cross-validation (Infer); the policy is GPI over the universal
	// SFs of the 8 skills nearest the inferred task.
	cfg := transfer.AdaptConfig{EpisodeSteps: 50, SwitchEvery: 10}
	labelled, err := transfer.Collect(env, agent, reward, 200, &cfg, rand.New(rand.NewPCG(2, 2)))
	if err != nil {
		fmt.Println(err)
		return
	}
	policy, err := transfer.Adapt(agent, labelled, &cfg)
	if err != nil {
		fmt.Println(err)
		return
	}
	ev, err := transfer.Evaluate(g.MDP, policy, reward, 0.95)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("labelled steps with a reward: %d\n", policy.Rewarded)
	fmt.Printf("normalised return: %.2f\n", ev.Score.Normalised)
	// Output:
	// labelled steps with a reward: 53
	// normalised return: 1.00
}
