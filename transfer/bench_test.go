package transfer

import (
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/skills"
)

// depotAgent returns a VMF agent on the demo depot, trained for a few
// steps so that its replay buffer is not empty.
func depotAgent(tb testing.TB, d, k int) (*Agent, *mdp.Sampler) {
	tb.Helper()
	g, err := mdp.Depot()
	if err != nil {
		tb.Fatal(err)
	}
	explore, err := mdp.WithStart(g.MDP, mdp.UniformStart(g.MDP))
	if err != nil {
		tb.Fatal(err)
	}
	env := mdp.NewSampler(explore, 0)
	ag, err := Pretrain(env, &PretrainConfig{Dim: d, Skills: k, Kappa: 10, SkillGamma: 0.99, Steps: 2000, EpisodeSteps: 50, Seed: 1})
	if err != nil {
		tb.Fatal(err)
	}
	return ag, env
}

// TestUpdateAllocs checks that one pretraining update (a minibatch of
// discriminator and TD steps) allocates nothing.
func TestUpdateAllocs(t *testing.T) {
	ag, _ := depotAgent(t, 16, 32)
	if n := testing.AllocsPerRun(100, func() {
		if err := ag.update(); err != nil {
			t.Fatal(err)
		}
	}); n != 0 {
		t.Errorf("update allocates %v times per call, want 0", n)
	}
}

// BenchmarkUpdate is one pretraining update: a minibatch of 16 replayed
// transitions, each a discriminator step and 5 TD steps (the acting skill
// and 4 relabelled ones), on the depot with the demo's sizes.
func BenchmarkUpdate(b *testing.B) {
	for _, sz := range []struct {
		name string
		d, k int
	}{{"d=8,K=32", 8, 32}, {"d=64,K=128", 64, 128}} {
		b.Run(sz.name, func(b *testing.B) {
			ag, _ := depotAgent(b, sz.d, sz.k)
			b.ReportAllocs()
			for b.Loop() {
				if err := ag.update(); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkPretrain measures pretraining throughput in environment steps
// per second (sampling, acting and updates included) with the demo's sizes,
// with the discriminator trained by dense Adam (the default) and by sparse
// Adam.
func BenchmarkPretrain(b *testing.B) {
	g, err := mdp.Depot()
	if err != nil {
		b.Fatal(err)
	}
	explore, _ := mdp.WithStart(g.MDP, mdp.UniformStart(g.MDP))
	const steps = 20000
	for _, m := range []skills.OptimMethod{skills.OptimAdam, skills.OptimSparseAdam} {
		b.Run("disc="+m.String(), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				_, err := Pretrain(mdp.NewSampler(explore, 0), &PretrainConfig{Dim: 64, Skills: 128, Kappa: 10, SkillGamma: 0.99, Steps: steps, EpisodeSteps: 50, Seed: 1, DiscOptim: m})
				if err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(steps)*float64(b.N)/b.Elapsed().Seconds(), "steps/s")
		})
	}
}

// BenchmarkAdapt is task inference from 1000 labelled transitions plus the
// acting policy on the depot: GPI over the USFs of the 8 nearest skills
// (fit=none, the default), and the same with the model-based candidate
// (fit=model, value iteration on the reward-free transitions).
func BenchmarkAdapt(b *testing.B) {
	ag, env := depotAgent(b, 64, 128)
	g, _ := mdp.Depot()
	w, _ := g.Weights(map[string]float64{"bench": 1})
	r, _ := g.PlaceReward(w)
	lab, err := Collect(env, ag, r, 1000, &AdaptConfig{}, rand.New(rand.NewPCG(1, 2)))
	if err != nil {
		b.Fatal(err)
	}
	for _, fit := range []FitMode{FitNone, FitModel} {
		b.Run("fit="+fit.String(), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if _, err := Adapt(ag, lab, &AdaptConfig{Fit: fit}); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
